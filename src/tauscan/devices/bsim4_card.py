"""BSIM4 model cards: defaults, the model flags evaluated, binning, geometry and temperature.

Everything here is bias-independent and computed once per device, vectorized over the devices
of a group (each column one number per device).  Equations and defaults are those of the BSIM4
technical manual (University of California, Berkeley, versions 4.5-4.8: its chapters on
geometry, binning, temperature and the parameter tables), written here in our own code;
defaults are recalled from the manual's tables (from memory) and SKY130's cards state almost
every one of them explicitly.
"""

from __future__ import annotations

import math

import numpy as np

from tauscan.circuit import Element, Model
from tauscan.errors import CircuitError

#: physical constants as the BSIM4 manual states them
KBOQ = 8.617087e-5  # Boltzmann's constant over the electron charge, V/K
Q = 1.60219e-19  # C
EPS0 = 8.85418e-12  # F/m
EPSSI = 1.03594e-10  # F/m (11.7 eps0)
CELSIUS = 273.15
#: the manual's guards on exponentials
EXP_THRESHOLD = 34.0
MIN_EXP = 1.713908431e-15
MAX_EXP = 5.834617425e14

#: model flags: the values evaluated exactly (any other value is a located error)
FLAGS = {
    "capmod": ({2.0}, 2.0, "charge model"),
    "mobmod": ({0.0}, 0.0, "mobility model"),
    "rdsmod": ({0.0}, 0.0, "bias-dependent source/drain resistance model"),
    "igcmod": ({0.0}, 0.0, "gate-to-channel tunnelling current"),
    "igbmod": ({0.0}, 0.0, "gate-to-body tunnelling current"),
    "rbodymod": ({0.0, 1.0}, 0.0, "body resistance network"),
    "rgatemod": ({0.0}, 0.0, "gate resistance"),
    "trnqsmod": ({0.0}, 0.0, "transient non-quasi-static model"),
    "acnqsmod": ({0.0}, 0.0, "AC non-quasi-static model"),
    "diomod": ({1.0}, 1.0, "junction diode current model"),
    "tempmod": ({0.0}, 0.0, "temperature model"),
    "permod": ({0.0, 1.0}, 1.0, "junction perimeter model"),
    "mtrlmod": ({0.0}, 0.0, "material model"),
    "wpemod": ({0.0}, 0.0, "well proximity model"),
    "geomod": (None, 0.0, "geometry model"),
}
#: versions whose equations are evaluated
VERSIONS = (4.5, 4.8)

#: parameters an effect not evaluated here needs: nonzero on a card -> located error
NOT_EVALUATED = {
    "lambda": "velocity overshoot (LAMBDA)", "vtl": "source-end velocity limit (VTL)",
    "gidlmod": "the GIDL model 1 (GIDLMOD)",
    "up": "mobility length dependence (UP)", "tvoff": "VOFF temperature coefficient (TVOFF)",
    "tvfbsdoff": "VFBSDOFF temperature coefficient", "ud1": "UD temperature coefficient (UD1)",
    "dvtp2": "DVTP2 (version 4.7 pocket term)", "dvtp3": "DVTP3", "dvtp4": "DVTP4", "dvtp5": "DVTP5",
}

#: defaults of the manual's parameter tables (from memory); None: derived from others below
DEFAULTS: dict[str, float | None] = {
    "version": 4.8, "binunit": 1.0, "toxe": 3e-9, "toxp": None, "toxm": None, "dtox": 0.0, "epsrox": 3.9,
    "cdsc": 2.4e-4, "cdscb": 0.0, "cdscd": 0.0, "cit": 0.0, "nfactor": 1.0, "xj": 1.5e-7, "vsat": 8e4,
    "at": 3.3e4, "a0": 1.0, "ags": 0.0, "a1": 0.0, "a2": 1.0, "keta": -0.047, "ndep": 1.7e17, "nsd": 1e20,
    "phin": 0.0, "ngate": 0.0, "vbm": -3.0, "k1": 0.53, "k2": -0.0186, "k3": 80.0, "k3b": 0.0, "w0": 2.5e-6,
    "kt1": -0.11, "kt1l": 0.0, "kt2": 0.022, "dvt0w": 0.0, "dvt1w": 5.3e6, "dvt2w": -0.032, "dvt0": 2.2,
    "dvt1": 0.53, "dvt2": -0.032, "vth0": None, "eta0": 0.08, "etab": -0.07, "drout": 0.56, "dsub": None,
    "voff": -0.08, "voffl": 0.0, "minv": 0.0, "lpe0": 1.74e-7, "lpeb": 0.0, "u0": None, "ua": 1e-9,
    "ub": 1e-19, "uc": -0.0465e-9, "ud": 1e14, "ute": -1.5, "ua1": 1e-9, "ub1": -1e-18, "uc1": -0.056e-9,
    "prt": 0.0, "rdsw": 200.0, "rdswmin": 0.0, "prwg": 1.0, "prwb": 0.0, "wr": 1.0, "delta": 0.01,
    "pclm": 1.3, "pdiblc1": 0.39, "pdiblc2": 0.0086, "pdiblcb": 0.0, "pvag": 0.0, "pscbe1": 4.24e8,
    "pscbe2": 1e-5, "fprout": 0.0, "pdits": 0.0, "pditsd": 0.0, "pditsl": 0.0, "alpha0": 0.0, "alpha1": 0.0,
    "beta0": 0.0, "b0": 0.0, "b1": 0.0, "dwg": 0.0, "dwb": 0.0, "dvtp0": 0.0, "dvtp1": 0.0,
    "xl": 0.0, "xw": 0.0, "lint": 0.0, "wint": 0.0, "ll": 0.0, "wl": 0.0, "lw": 0.0, "ww": 0.0, "lwl": 0.0,
    "wwl": 0.0, "lln": 1.0, "lwn": 1.0, "wln": 1.0, "wwn": 1.0, "llc": None, "lwc": None, "lwlc": None,
    "wlc": None, "wwc": None, "wwlc": None, "dlc": None, "dwc": None, "dwj": None,
    "tnom": 27.0, "ados": 1.0, "bdos": 1.0, "noff": 1.0, "voffcv": 0.0, "acde": 1.0, "moin": 15.0,
    "clc": 1e-7, "cle": 0.6, "cf": None, "cgso": None, "cgdo": None, "cgbo": 0.0, "cgsl": 0.0, "cgdl": 0.0,
    "ckappas": 0.6, "ckappad": None, "xpart": 0.0,
    "agidl": 0.0, "bgidl": 2.3e9, "cgidl": 0.5, "egidl": 0.8, "agisl": None, "bgisl": None, "cgisl": None,
    "egisl": None,
    "cjs": 5e-4, "cjd": None, "mjs": 0.5, "mjd": None, "pbs": 1.0, "pbd": None, "cjsws": 5e-10, "cjswd": None,
    "mjsws": 0.33, "mjswd": None, "pbsws": 1.0, "pbswd": None, "cjswgs": None, "cjswgd": None, "mjswgs": None,
    "mjswgd": None, "pbswgs": None, "pbswgd": None, "tcj": 0.0, "tcjsw": 0.0, "tcjswg": 0.0, "tpb": 0.0,
    "tpbsw": 0.0, "tpbswg": 0.0, "jss": 1e-4, "jsd": None, "jsws": 0.0, "jswd": None, "jswgs": 0.0,
    "jswgd": None, "njs": 1.0, "njd": None, "xtis": 3.0, "xtid": None, "ijthsfwd": 0.1, "ijthdfwd": None,
    "gbmin": 1e-12, "rbpb": 50.0, "rbpd": 50.0, "rbps": 50.0, "rbdb": 50.0, "rbsb": 50.0, "rsh": 0.0,
    "dmcg": 0.0, "dmci": None, "dmdg": 0.0, "dmcgt": 0.0,
}

#: size-dependent parameters: P = P0 + PL/Leff + PW/Weff + PP/(Leff Weff) (the manual's binning)
BINNED = (
    "vth0", "k1", "k2", "k3", "k3b", "w0", "lpe0", "lpeb", "dvt0", "dvt1", "dvt2", "dvt0w", "dvt1w",
    "dvt2w", "dsub", "eta0", "etab", "nfactor", "cdsc", "cdscb", "cdscd", "cit", "voff", "minv", "ua",
    "ub", "uc", "ud", "u0", "ute", "ua1", "ub1", "uc1", "a0", "ags", "a1", "a2", "b0", "b1", "keta", "vsat",
    "at", "rdsw", "rdswmin", "prwg", "prwb", "wr", "delta", "pclm", "pdiblc1", "pdiblc2", "pdiblcb",
    "drout", "pvag", "pscbe1", "pscbe2", "fprout", "pdits", "pditsd", "alpha0", "alpha1", "beta0",
    "kt1", "kt1l", "kt2", "prt", "xj", "ndep", "nsd", "phin", "ngate", "vbm", "dwg", "dwb", "cgsl",
    "cgdl", "ckappas", "ckappad", "cf", "clc", "cle", "noff", "voffcv", "acde", "moin", "dvtp0", "dvtp1",
    "vfb", "agidl", "bgidl", "cgidl", "egidl", "agisl", "bgisl", "cgisl", "egisl",
)

#: instance parameters and their defaults (SI units)
INSTANCE = {"w": 5e-6, "l": 5e-6, "nf": 1.0, "m": 1.0, "delvto": 0.0, "sa": 0.0, "sb": 0.0, "sd": 0.0,
            "nrd": 0.0, "nrs": 0.0}
#: instance values that fall back to the card's (per device)
INSTANCE_FROM_CARD = ("rbpb", "rbpd", "rbps", "rbdb", "rbsb")
#: every other instance parameter a BSIM4 line may carry: those read (areas and perimeters; OFF,
#: a starting guess for the DC solution that the solution itself does not depend on), and
#: those whose effect is not evaluated, with the value that leaves them without effect
INSTANCE_READ = ("ad", "as", "pd", "ps", "off")
INSTANCE_INERT = {"mulu0": 1.0, "sca": 0.0, "scb": 0.0, "scc": 0.0, "sc": 0.0, "min": 0.0, "xgw": 0.0, "ngcon": 1.0}


def _check_instances(elements: list[Element]) -> None:
    """Every instance parameter is one BSIM4 reads, or one left at the value without effect;
    anything else is a located error (never silently dropped)."""
    known = set(INSTANCE) | set(INSTANCE_FROM_CARD) | set(INSTANCE_READ)
    seen: set[int] = set()
    for e in elements:
        if id(e.params) in seen:  # (lines that read the same share one dictionary)
            continue
        seen.add(id(e.params))
        for key, value in e.params.items():
            if key in known:
                continue
            inert = INSTANCE_INERT.get(key)
            if inert is None:
                raise CircuitError(f"{e.name}: {key.upper()} is not a BSIM4 instance parameter tauscan reads", e.file, e.line)
            if value != inert:
                raise CircuitError(f"{e.name}: {key.upper()}={value:g} has an effect tauscan does not evaluate for BSIM4 "
                                   f"(only {key.upper()}={inert:g}); supply the operating point with --op", e.file, e.line)


def check_card(model: Model) -> None:
    """The card's flags and effects are all evaluated, or a located error naming the card and flag."""
    p = model.params
    version = p.get("version")
    if version is not None and not VERSIONS[0] - 1e-9 <= version <= VERSIONS[1] + 1e-9:
        raise CircuitError(f"model {model.card_name}: BSIM4 version {version:g} is not evaluated "
                           f"(versions {VERSIONS[0]:g} to {VERSIONS[1]:g} are)", model.file, model.line)
    for flag, (allowed, default, what) in FLAGS.items():
        value = p.get(flag, default)
        if allowed is not None and value not in allowed:
            ok = ", ".join(f"{v:g}" for v in sorted(allowed))
            raise CircuitError(f"model {model.card_name}: {flag.upper()}={value:g} ({what}) is not evaluated; "
                               f"tauscan evaluates {flag.upper()}={ok}; supply the operating point with --op",
                               model.file, model.line)
    for key, what in NOT_EVALUATED.items():
        if p.get(key):
            raise CircuitError(f"model {model.card_name}: {key.upper()}={p[key]:g} switches on {what}, which "
                               "tauscan does not evaluate; supply the operating point with --op", model.file, model.line)


def _card_value(params: dict, key: str) -> float:
    value = params.get(key)
    if value is not None:
        return float(value)
    default = DEFAULTS.get(key)
    return 0.0 if default is None else float(default)


def _derived_defaults(model: Model) -> dict[str, float]:
    """The card's parameters with the manual's derived defaults filled in."""
    given = model.params
    out = {k: v for k, v in DEFAULTS.items() if v is not None}
    out.update({flag: default for flag, (_allowed, default, _what) in FLAGS.items()})
    out.update({k: float(v) for k, v in given.items() if isinstance(v, (int, float))})
    nmos = model.type == "nmos"
    out.setdefault("vth0", 0.7 if nmos else -0.7)
    out.setdefault("u0", 0.067 if nmos else 0.025)
    toxe = out["toxe"]
    if "toxp" not in given:
        out["toxp"] = toxe - out["dtox"] if "dtox" in given else toxe
    out.setdefault("toxm", toxe)
    out.setdefault("dsub", out["drout"])
    for src, dst in (("ll", "llc"), ("lw", "lwc"), ("lwl", "lwlc"), ("wl", "wlc"), ("ww", "wwc"), ("wwl", "wwlc"),
                     ("lint", "dlc"), ("wint", "dwc")):
        out.setdefault(dst, out[src])
    out.setdefault("dwj", out["dwc"])
    out.setdefault("ckappad", out["ckappas"])
    out.setdefault("dmci", out["dmcg"])
    for gidl in ("agidl", "bgidl", "cgidl", "egidl"):  # GISL takes GIDL's coefficients unless given
        for prefix in ("", "l", "w", "p"):
            if prefix + gidl in out:
                out.setdefault(prefix + gidl.replace("gidl", "gisl"), out[prefix + gidl])
    if "cf" not in given:  # fringing: 2 eps_ox / pi ln(1 + 0.4 um / TOXE) (the manual's default)
        out["cf"] = 2.0 * out["epsrox"] * EPS0 / math.pi * math.log(1.0 + 0.4e-6 / toxe)
    # drain-side junction parameters default to the source side's
    for s, d in (("cjs", "cjd"), ("mjs", "mjd"), ("pbs", "pbd"), ("cjsws", "cjswd"), ("mjsws", "mjswd"),
                 ("pbsws", "pbswd"), ("jss", "jsd"), ("jsws", "jswd"), ("njs", "njd"), ("xtis", "xtid"),
                 ("ijthsfwd", "ijthdfwd")):
        out.setdefault(d, out[s])
    out.setdefault("cjswgs", out["cjsws"])
    out.setdefault("cjswgd", out["cjswgs"] if "cjswgs" in given else out["cjswd"])
    out.setdefault("mjswgs", out["mjsws"])
    out.setdefault("mjswgd", out["mjswgs"] if "mjswgs" in given else out["mjswd"])
    out.setdefault("pbswgs", out["pbsws"])
    out.setdefault("pbswgd", out["pbswgs"] if "pbswgs" in given else out["pbswd"])
    out.setdefault("jswgs", 0.0)
    out.setdefault("jswgd", out["jswgs"])
    return out


class Columns(dict):
    """Per-device arrays by parameter name."""


def device_columns(elements: list[Element], cards: list[Model], temp_c: float) -> Columns:
    """Every bias-independent quantity of each device (one array entry per device).

    ``cards[i]`` is the model card of ``elements[i]`` (already binned by L and W/nf).
    """
    n = len(elements)
    slot: dict[int, int] = {}
    distinct: list[dict] = []
    which = np.empty(n, dtype=np.int64)
    for i, card in enumerate(cards):
        k = slot.get(id(card))
        if k is None:
            check_card(card)
            k = slot[id(card)] = len(distinct)
            distinct.append(_derived_defaults(card))
        which[i] = k

    def col(key: str, default: float = 0.0) -> np.ndarray:
        """A card parameter per device: read once per distinct card, then spread."""
        return np.array([p.get(key, default) for p in distinct], dtype=float)[which]

    _check_instances(elements)
    c = Columns()
    c["type"] = np.array([1.0 if card.type == "nmos" else -1.0 for card in cards])
    inst = {k: np.fromiter((e.params.get(k, v) for e in elements), dtype=float, count=n) for k, v in INSTANCE.items()}
    for k in INSTANCE_FROM_CARD:
        card_v = col(k)
        inst[k] = np.array([e.params.get(k, cv) for e, cv in zip(elements, card_v)], dtype=float)
    for k in ("as", "ad", "ps", "pd"):
        inst[k] = np.array([e.params.get(k, np.nan) for e in elements], dtype=float)
    nf = np.maximum(inst["nf"], 1.0)
    c["nf"], c["m"] = nf, inst["m"]
    for bad, message in ((inst["w"] <= 0, "W must be positive"), (inst["l"] <= 0, "L must be positive"),
                         (inst["m"] <= 0, "M must be positive")):
        if bad.any():
            e = elements[int(np.argmax(bad))]
            raise CircuitError(f"{e.name}: {message}", e.file, e.line)

    # -- geometry (the manual's effective channel length and width) --------------------------
    ldrn, wdrn = inst["l"], inst["w"] / nf
    t0, t1 = ldrn ** col("lln"), wdrn ** col("lwn")
    dl = col("lint") + col("ll") / t0 + col("lw") / t1 + col("lwl") / (t0 * t1)
    dlc = col("dlc") + col("llc") / t0 + col("lwc") / t1 + col("lwlc") / (t0 * t1)
    t2, t3 = ldrn ** col("wln"), wdrn ** col("wwn")
    dw = col("wint") + col("wl") / t2 + col("ww") / t3 + col("wwl") / (t2 * t3)
    tail = col("wlc") / t2 + col("wwc") / t3 + col("wwlc") / (t2 * t3)
    dwc = col("dwc") + tail
    dwj = col("dwj") + tail
    leff = ldrn + col("xl") - 2.0 * dl
    weff = wdrn + col("xw") - 2.0 * dw
    c["leffcv"] = ldrn + col("xl") - 2.0 * dlc
    c["weffcv"] = wdrn + col("xw") - 2.0 * dwc
    c["weffcj"] = wdrn + col("xw") - 2.0 * dwj
    for name, arr in (("effective channel length", leff), ("effective channel width", weff),
                      ("effective length for capacitance", c["leffcv"]), ("effective width for capacitance", c["weffcv"])):
        bad = arr <= 0
        if bad.any():
            i = int(np.argmax(bad))
            e = elements[i]
            raise CircuitError(f"{e.name}: the BSIM4 {name} is {arr[i]:.3g} m, not positive (check L, W and the card's "
                               "LINT/WINT family)", e.file, e.line)
    c["leff"], c["weff"] = leff, weff

    # -- binning ----------------------------------------------------------------------------
    micron = col("binunit", 1.0) == 1.0
    inv_l = np.where(micron, 1e-6, 1.0) / leff
    inv_w = np.where(micron, 1e-6, 1.0) / weff
    inv_lw = np.where(micron, 1e-12, 1.0) / (leff * weff)
    for key in BINNED:
        c[key] = col(key) + col("l" + key) * inv_l + col("w" + key) * inv_w + col("p" + key) * inv_lw
    for key in ("toxe", "toxp", "toxm", "epsrox", "voffl", "pditsl", "xpart", "cgbo", "gbmin", "rsh",
                "tnom", "ados", "bdos", "dmcg", "dmci", "dmdg", "permod", "rbodymod"):
        c[key] = col(key, DEFAULTS.get(key) or 0.0)
    c["cgso_given"] = np.array([1.0 if "cgso" in card.params else 0.0 for card in cards])
    c["cgdo_given"] = np.array([1.0 if "cgdo" in card.params else 0.0 for card in cards])
    c["cgso_card"], c["cgdo_card"] = col("cgso"), col("cgdo")
    u0 = c["u0"]
    c["u0"] = np.where(u0 > 1.0, u0 * 1e-4, u0)  # given in cm^2/Vs when above 1 (the manual's rule)

    # -- layout-dependent stress (SA, SB, SD): shifts of VTH0, K2, ETA0, U0 and VSAT ----------
    stress = _stress(col, inst, nf, ldrn, wdrn)
    # the flat band VFB (and so the charge centroid's VTFBPHI2) keeps the threshold before the
    # stress shift; VFBZB of the charges takes the shifted one (as the reference does for 4.5)
    c["vth0_plain"] = c["vth0"].copy()
    if stress is not None:
        other = stress["on"] & (np.abs(col("version", DEFAULTS["version"]) - 4.5) > 1e-9)
        if other.any():
            e = elements[int(np.argmax(other))]
            raise CircuitError(f"{e.name}: SA and SB switch on BSIM4's layout-dependent stress, which tauscan "
                               "evaluates for version 4.5 cards only (as checked against the reference "
                               "implementation); leave them 0 or supply the operating point with --op", e.file, e.line)
        c["vth0"] = c["vth0"] + stress["vth0"]
        c["k2"] = c["k2"] + stress["k2"]
        c["eta0"] = c["eta0"] + stress["eta0"]

    # -- temperature (TEMPMOD = 0) and the derived constants ---------------------------------
    tnom = c["tnom"] + CELSIUS
    temp = temp_c + CELSIUS
    c["temp"] = np.full(n, temp)
    ratio = temp / tnom
    c["tratio"] = ratio
    vtm0 = KBOQ * tnom
    vtm = KBOQ * temp
    c["vtm"] = np.full(n, vtm)
    eg0 = 1.16 - 7.02e-4 * tnom * tnom / (tnom + 1108.0)
    eg = 1.16 - 7.02e-4 * temp * temp / (temp + 1108.0)
    ni = 1.45e10 * (tnom / 300.15) * np.sqrt(tnom / 300.15) * np.exp(21.5565981 - eg0 / (2.0 * vtm0))
    toxe, toxp, epsox = c["toxe"], c["toxp"], c["epsrox"] * EPS0
    c["coxe"] = epsox / toxe
    c["coxp"] = epsox / toxp
    c["factor1"] = np.sqrt(EPSSI / epsox * toxe)
    dt = ratio - 1.0
    c["ua"] = c["ua"] + c["ua1"] * dt
    c["ub"] = c["ub"] + c["ub1"] * dt
    c["uc"] = c["uc"] + c["uc1"] * dt
    c["u0temp"] = c["u0"] * ratio ** c["ute"]
    c["vsattemp"] = c["vsat"] - c["at"] * dt
    if stress is not None:
        ku0temp = stress["ku0"] * (1.0 + col("tku0") * dt) + STRESS_DELTA
        rho = col("ku0") / ku0temp * stress["inv_od"]
        rho_ref = col("ku0") / ku0temp * stress["inv_od_ref"]
        kvsat = np.clip(col("kvsat"), -1.0, 1.0)
        on = stress["on"]
        # the manual also scales U0 by (1 + rho) / (1 + rho_ref); the reference implementation of
        # version 4.5 (the only version whose stress effect is evaluated here) leaves the
        # mobility of the current unchanged, and tauscan follows it
        c["vsattemp"] = np.where(on, c["vsattemp"] * (1.0 + kvsat * rho) / (1.0 + kvsat * rho_ref), c["vsattemp"])
    t10 = c["prt"] * dt
    pow_weff_wr = (c["weffcj"] * 1e6) ** c["wr"] * nf
    c["rds0"] = (c["rdsw"] + t10) * nf / pow_weff_wr
    c["rdswmin"] = (c["rdswmin"] + t10) * nf / pow_weff_wr
    phi = vtm0 * np.log(c["ndep"] / ni) + c["phin"] + 0.4
    c["phi"] = phi
    c["sqrtphi"] = np.sqrt(phi)
    c["xdep0"] = np.sqrt(2.0 * EPSSI / (Q * c["ndep"] * 1e6)) * c["sqrtphi"]
    c["litl"] = np.sqrt(3.0 * 3.9 / c["epsrox"] * c["xj"] * toxe)
    c["vbi"] = vtm0 * np.log(c["nsd"] * c["ndep"] / (ni * ni))
    c["cdep0"] = np.sqrt(Q * EPSSI * c["ndep"] * 1e6 / 2.0 / phi)
    c["ldeb"] = np.sqrt(EPSSI * vtm0 / (Q * c["ndep"] * 1e6)) / 3.0
    c["acde"] = c["acde"] * (c["ndep"] / 2.0e16) ** -0.25
    c["mstar"] = 0.5 + np.arctan(c["minv"]) / math.pi
    c["voffcbn"] = c["voff"] + c["voffl"] / leff
    k1, k2 = c["k1"], c["k2"]
    c["k1ox"] = k1 * toxe / c["toxm"]
    c["k2ox"] = k2 * toxe / c["toxm"]
    with np.errstate(divide="ignore", invalid="ignore"):
        t0 = 0.5 * k1 / k2
        vbsc = np.where(k2 < 0.0, np.clip(0.9 * (phi - t0 * t0), -30.0, -3.0), -30.0)
    c["vbsc"] = np.minimum(vbsc, c["vbm"])
    c["abulkcv_factor"] = 1.0 + (c["clc"] / c["leffcv"]) ** c["cle"]
    lt0 = np.sqrt(EPSSI / epsox * toxe * c["xdep0"])
    c["theta0vb0"] = _half_csch2(c["dsub"] * leff / lt0)
    c["thetarout"] = c["pdiblc1"] * _half_csch2(c["drout"] * leff / lt0) + c["pdiblc2"]
    typ = c["type"]
    vth0 = c["vth0"] + inst["delvto"]  # DELVTO adds to the card's signed VTH0
    c["vth0_t"] = typ * vth0  # the type-normalized zero-bias threshold of each instance
    vfb_given = np.array([1.0 if "vfb" in card.params else 0.0 for card in cards])
    vth0_plain_t = typ * (c["vth0_plain"] + inst["delvto"])
    c["vfb"] = np.where(vfb_given > 0, c["vfb"], vth0_plain_t - phi - k1 * c["sqrtphi"])
    # the zero-bias threshold's flat band for the charge model (VFBZB)
    sq = np.sqrt(c["xdep0"])
    v0 = c["vbi"] - phi
    lt = c["factor1"] * sq
    t8 = c["dvt0w"] * _half_csch2(c["dvt1w"] * weff * leff / lt) * v0
    t9 = c["dvt0"] * _half_csch2(c["dvt1"] * leff / lt) * v0
    t4 = toxe * phi / (weff + c["w0"])
    t5 = c["k1ox"] * (np.sqrt(1.0 + c["lpe0"] / leff) - 1.0) * c["sqrtphi"] + (c["kt1"] + c["kt1l"] / leff) * dt
    c["vfbzb"] = -t8 - t9 + c["k3"] * t4 + t5 - phi - k1 * c["sqrtphi"] + c["vth0_t"]
    t3 = c["vth0_t"] - c["vfb"] - phi
    c["vtfbphi2"] = np.maximum(4.0 * t3, 0.0)
    # overlap: CGSO/CGDO default to DLC COXE - CGSL when DLC is given, else 0.6 XJ COXE (the manual's rule)
    dlc_given = np.array([1.0 if card.params.get("dlc", 0.0) > 0 else 0.0 for card in cards])
    xj_cox = 0.6 * c["xj"] * c["coxe"]
    cgso = np.where(c["cgso_given"] > 0, c["cgso_card"],
                    np.where(dlc_given > 0, np.maximum(col("dlc") * c["coxe"] - c["cgsl"], 0.0), xj_cox))
    cgdo = np.where(c["cgdo_given"] > 0, c["cgdo_card"],
                    np.where(dlc_given > 0, np.maximum(col("dlc") * c["coxe"] - c["cgdl"], 0.0), xj_cox))
    c["cgso_w"] = (cgso + c["cf"]) * c["weffcv"]
    c["cgdo_w"] = (cgdo + c["cf"]) * c["weffcv"]
    c["cgbo_l"] = c["cgbo"] * c["leffcv"]

    # -- junctions: areas, perimeters, temperature ------------------------------------------
    nvtm = vtm
    for side, s in (("s", "s"), ("d", "d")):
        area, perim = inst["a" + side], inst["p" + side]
        no_geometry = np.isnan(area) | np.isnan(perim)
        if no_geometry.any():
            dm = (c["dmcg"] != 0) | (c["dmci"] != 0) | (c["dmdg"] != 0)
            bad = no_geometry & dm
            if bad.any():
                e = elements[int(np.argmax(bad))]
                raise CircuitError(f"{e.name}: no A{side.upper()}/P{side.upper()} given and the card sets DMCG/DMCI/DMDG: "
                                   "BSIM4's geometry-derived junction areas are not evaluated; give AS, AD, PS and PD",
                                   e.file, e.line)
        area = np.where(np.isnan(area), 0.0, area)
        # with no DMCG family the manual's isolated-diffusion geometry gives P = Weffcj per finger
        perim = np.where(np.isnan(perim), c["weffcj"] * nf, perim)
        # PERMOD = 1: the perimeter given includes the gate edge, which is taken off.  The result
        # is not clipped at zero (as the reference implementation does not): a negative sidewall
        # part then lowers the zero- and forward-bias capacitance only (see the junction law)
        peff = np.where(c["permod"] == 0, perim, perim - c["weffcj"] * nf)
        c["a" + s + "eff"], c["p" + s + "eff"] = area, peff
        j = "s" if s == "s" else "d"
        t_arg = eg0 / vtm0 - eg / vtm + col("xti" + j) * np.log(ratio)
        factor = np.exp(t_arg / col("nj" + j))
        sat = (area * col("js" + j) + peff * col("jsw" + j) + c["weffcj"] * nf * col("jswg" + j)) * factor
        c["isat_" + s] = sat
        c["nvt_" + s] = col("nj" + j) * nvtm
        fwd = col("ijth" + j + "fwd")
        with np.errstate(divide="ignore", invalid="ignore"):
            c["vjfwd_" + s] = np.where(sat > 0, c["nvt_" + s] * np.log(fwd / np.where(sat > 0, sat, 1.0) + 1.0), 0.0)
        c["ivjfwd_" + s] = sat * np.exp(c["vjfwd_" + s] / c["nvt_" + s])
        dtemp = temp - tnom
        c["cz_" + s] = area * col("cj" + j) * (1.0 + col("tcj") * dtemp)
        c["czsw_" + s] = peff * col("cjsw" + j) * (1.0 + col("tcjsw") * dtemp)
        c["czswg_" + s] = c["weffcj"] * nf * col("cjswg" + j) * (1.0 + col("tcjswg") * dtemp)
        c["pb_" + s] = np.maximum(col("pb" + j) - col("tpb") * dtemp, 0.01)
        c["pbsw_" + s] = np.maximum(col("pbsw" + j) - col("tpbsw") * dtemp, 0.01)
        c["pbswg_" + s] = np.maximum(col("pbswg" + j) - col("tpbswg") * dtemp, 0.01)
        c["mj_" + s], c["mjsw_" + s], c["mjswg_" + s] = col("mj" + j), col("mjsw" + j), col("mjswg" + j)
    # series diffusion resistance (RSH * NRS), outside the current equation
    c["rs_ext"] = c["rsh"] * inst["nrs"]
    c["rd_ext"] = c["rsh"] * inst["nrd"]
    for k in INSTANCE_FROM_CARD:
        c[k] = inst[k]
    return c


#: the manual's small constant that keeps the stress terms' denominators off zero
STRESS_DELTA = 1e-9


def _stress(col, inst: dict, nf: np.ndarray, ldrn: np.ndarray, wdrn: np.ndarray) -> dict | None:
    """BSIM4's stress effect of the diffusion lengths SA, SB (and SD between fingers): with
    Inv_OD = sum over the NF fingers of 1/NF (1/(SA + L/2 + i (SD + L)) + 1/(SB + L/2 + i (SD + L)))
    and Inv_OD,ref the same at SAREF, SBREF for one finger, VTH0 moves by
    KVTH0 / Kvth0 (Inv_OD - Inv_OD,ref) (K2 by STK2 / Kvth0^LODK2 and ETA0 by
    STETA0 / Kvth0^LODETA0 times the same), U0 by (1 + rho) / (1 + rho_ref) and VSAT by
    (1 + KVSAT rho) / (1 + KVSAT rho_ref), rho = KU0 / Ku0 Inv_OD; Ku0 and Kvth0 are the
    geometry terms 1 + LKU0/L^LLODKU0 + WKU0/(W + WLOD)^WLODKU0 + PKU0/(...)
    (BSIM4 manual, stress effect).  None when no device has SA > 0 and SB > 0 (and SD > 0 with
    fingers)."""
    sa, sb, sd = inst["sa"], inst["sb"], inst["sd"]
    on = (sa > 0) & (sb > 0) & ((nf == 1) | (sd > 0))
    if not on.any():
        return None
    inv_sa = np.zeros_like(sa)
    inv_sb = np.zeros_like(sb)
    for i in range(int(nf.max())):
        take = i < nf
        span = i * (sd + ldrn) + 0.5 * ldrn
        inv_sa += np.where(take, 1.0 / nf / np.where(on, sa + span, 1.0), 0.0)
        inv_sb += np.where(take, 1.0 / nf / np.where(on, sb + span, 1.0), 0.0)
    inv_od = np.where(on, inv_sa + inv_sb, 0.0)
    inv_od_ref = 1.0 / (col("saref", 1e-6) + 0.5 * ldrn) + 1.0 / (col("sbref", 1e-6) + 0.5 * ldrn)
    lnew = ldrn + col("xl")
    w_tmp = wdrn + col("xw") + col("wlod")

    def geometry(prefix_l: str, prefix_w: str, prefix_p: str, exp_l: str, exp_w: str) -> np.ndarray:
        t0 = lnew ** col(exp_l)
        t1 = w_tmp ** col(exp_w)
        return 1.0 + col(prefix_l) / t0 + col(prefix_w) / t1 + col(prefix_p) / (t0 * t1)

    ku0 = geometry("lku0", "wku0", "pku0", "llodku0", "wlodku0")
    kvth0 = geometry("lkvth0", "wkvth0", "pkvth0", "llodvth", "wlodvth")
    kvth0 = np.sqrt(kvth0 * kvth0 + STRESS_DELTA)
    offset = np.where(on, inv_od - inv_od_ref, 0.0)
    return {"on": on, "inv_od": inv_od, "inv_od_ref": inv_od_ref, "ku0": ku0,
            "vth0": col("kvth0") / kvth0 * offset,
            "k2": col("stk2") / kvth0 ** col("lodk2", 1.0) * offset,
            "eta0": col("steta0") / kvth0 ** col("lodeta0", 1.0) * offset}


def _half_csch2(x: np.ndarray) -> np.ndarray:
    """0.5 / (cosh(x) - 1), as the manual evaluates it: exp(x) / ((exp(x) - 1)^2 + 2 exp(x) MIN_EXP)."""
    x = np.asarray(x, float)
    small = x < EXP_THRESHOLD
    e = np.exp(np.minimum(x, EXP_THRESHOLD))
    return np.where(small, e / ((e - 1.0) ** 2 + 2.0 * e * MIN_EXP), 1.0 / (MAX_EXP - 2.0))
