"""Model cards: SPICE parameter names, their defaults, and how other MOSFET
levels are mapped onto level 1 (with a warning for every approximation).

Defaults are the SPICE2 ones (Nagel 1975; Antognetti and Massobrio 1993,
tables of model parameters), recalled from memory.
"""

from __future__ import annotations

import math
import os

from tauscan.circuit import DEFAULT_MOS_LENGTH, DEFAULT_MOS_WIDTH, Element, Model
from tauscan.errors import CircuitError

INF = math.inf

MOS_DEFAULTS = {
    "level": 1.0, "vto": 0.0, "kp": None, "gamma": 0.0, "phi": 0.6, "lambda": 0.0,
    "rd": 0.0, "rs": 0.0, "rsh": 0.0, "cbd": None, "cbs": None, "is": 1e-14, "js": 0.0,
    "pb": 0.8, "cgso": 0.0, "cgdo": 0.0, "cgbo": 0.0, "cj": 0.0, "mj": 0.5,
    "cjsw": 0.0, "mjsw": 0.33, "tox": None, "uo": 600.0, "ld": 0.0, "fc": 0.5,
    "tnom": None, "nsub": None,
}
MOS_INSTANCE = {"w": DEFAULT_MOS_WIDTH, "l": DEFAULT_MOS_LENGTH, "ad": 0.0, "as": 0.0, "pd": 0.0, "ps": 0.0, "nrd": 0.0, "nrs": 0.0, "m": 1.0}

BJT_DEFAULTS = {
    "is": 1e-16, "bf": 100.0, "nf": 1.0, "vaf": INF, "ikf": INF, "ise": 0.0, "ne": 1.5,
    "br": 1.0, "nr": 1.0, "var": INF, "ikr": INF, "isc": 0.0, "nc": 2.0,
    "rb": 0.0, "re": 0.0, "rc": 0.0, "cje": 0.0, "vje": 0.75, "mje": 0.33, "tf": 0.0,
    "cjc": 0.0, "vjc": 0.75, "mjc": 0.33, "xcjc": 1.0, "tr": 0.0, "cjs": 0.0, "vjs": 0.75,
    "mjs": 0.0, "fc": 0.5, "eg": 1.11, "xti": 3.0, "tnom": None,
}
BJT_ALIASES = {"va": "vaf", "vb": "var", "ik": "ikf", "c2": "ise", "c4": "isc", "pe": "vje", "me": "mje", "pc": "vjc", "mc": "mjc", "ccs": "cjs", "ps": "vjs", "ms": "mjs"}

DIODE_DEFAULTS = {
    "is": 1e-14, "n": 1.0, "rs": 0.0, "cjo": 0.0, "vj": 1.0, "m": 0.5, "tt": 0.0,
    "fc": 0.5, "bv": INF, "ibv": 1e-3, "eg": 1.11, "xti": 3.0, "tnom": None,
}
DIODE_ALIASES = {"cj0": "cjo", "cj": "cjo", "pb": "vj", "mj": "m"}

MOS_TYPES = {"nmos": 1.0, "pmos": -1.0}
BJT_TYPES = {"npn": 1.0, "pnp": -1.0}
DIODE_TYPES = {"d"}

#: BSIM-family (and other) names mapped onto level-1 parameters, with what the mapping loses.
_MOS_MAP = [
    ("vth0", "vto", "threshold VTH0 used as VTO; short-channel, DIBL and body-effect shaping are not modelled"),
    ("u0", "uo", "low-field mobility U0 used as UO; mobility degradation and velocity saturation are not modelled"),
    ("toxe", "tox", "TOXE used as TOX"),
    ("k1", "gamma", "K1 used as the body-effect coefficient GAMMA"),
    ("cjs", "cj", "CJS used as CJ"),
    ("cjd", "cj", "CJD used as CJ"),
    ("mjs", "mj", "MJS used as MJ"),
    ("cjsws", "cjsw", "CJSWS used as CJSW"),
    ("mjsws", "mjsw", "MJSWS used as MJSW"),
    ("pbs", "pb", "PBS used as PB"),
]


#: parameters that must be strictly positive, per family (their formulas divide by them)
_POSITIVE = {
    "mos": ("phi", "pb", "uo"),
    "bjt": ("is", "bf", "br", "nf", "nr", "ne", "nc", "vje", "vjc", "vjs"),
    "diode": ("is", "n", "vj"),
}
_NON_NEGATIVE = ("mj", "mjsw", "mje", "mjc", "mjs", "m", "tf", "tr", "tt", "rd", "rs", "rb", "re", "rc",
                 "cgso", "cgdo", "cgbo", "cj", "cjsw", "cje", "cjc", "cjs", "cjo", "ise", "isc", "ld", "js", "xcjc")


def _validate(model: Model, params: dict, family: str) -> dict:
    for key in _POSITIVE[family]:
        value = params.get(key)
        if value is not None and not value > 0:
            raise CircuitError(f"model {model.name!r}: {key.upper()} must be positive, not {value:g}", model.file, model.line)
    for key in _NON_NEGATIVE:
        value = params.get(key)
        if isinstance(value, float) and value < 0:
            raise CircuitError(f"model {model.name!r}: {key.upper()} must not be negative ({value:g})", model.file, model.line)
    fc = params.get("fc")
    if fc is not None and not 0 <= fc < 1:
        raise CircuitError(f"model {model.name!r}: FC must be in [0, 1), not {fc:g}", model.file, model.line)
    tox = params.get("tox")
    if tox is not None and not tox > 0:
        raise CircuitError(f"model {model.name!r}: TOX must be positive, not {tox:g}", model.file, model.line)
    xcjc = params.get("xcjc")
    if xcjc is not None and xcjc > 1:
        raise CircuitError(f"model {model.name!r}: XCJC must be at most 1, not {xcjc:g}", model.file, model.line)
    return params


def _lookup(model: Model, element: Element, allowed: set[str], what: str) -> None:
    if model.type not in allowed:
        raise CircuitError(
            f"{element.name}: model {model.name!r} is a {model.type!r} model, not {what}", element.file, element.line
        )


def merged(defaults: dict, model: Model, aliases: dict | None = None) -> dict:
    """Model parameters over the defaults, aliases resolved."""
    out = dict(defaults)
    for key, value in model.params.items():
        key = (aliases or {}).get(key, key)
        out[key] = value
    return out


def mos_parameters(model: Model, element: Element, warnings: list[str]) -> dict:
    """Level-1 parameters for a MOSFET instance's model, mapping other levels (with warnings)."""
    _lookup(model, element, set(MOS_TYPES), "nmos or pmos")
    params = merged(MOS_DEFAULTS, model)
    level = int(params.get("level") or 1)
    if level != 1:
        notes = _map_other_level(model, params, level, element)
        # one warning per model card, however many instances (and per-instance copies) use it
        where = f"{os.path.basename(model.file)}:{model.line}" if model.file else ""
        text = (f"model {model.card_name} (level {level}{', ' + where if where else ''}): " + "; ".join(notes)
                + "; pass the operating point with --op for accurate figures")
        if text not in warnings:
            warnings.append(text)
    return _validate(model, params, "mos")


#: Early voltage per micron of channel length that stands in for a BSIM card's output
#: conductance under the level-1 law (rough: common practice, from memory).
EARLY_VOLTS_PER_UM = 10.0


def _binned(given: dict, key: str, element: Element) -> float:
    """A BSIM parameter with its binning terms, P = P0 + PL/L + PW/W + PP/(L W) (BSIM4 manual,
    binning), taken at the drawn L and W per finger of ``element`` (microns when BINUNIT = 1)."""
    value = given[key]
    terms = [given.get(prefix + key, 0.0) for prefix in ("l", "w", "p")]
    if not any(terms):
        return value
    length = element.params.get("l", MOS_INSTANCE["l"])
    width = element.params.get("w", MOS_INSTANCE["w"]) / max(element.params.get("nf", 1.0), 1.0)
    if given.get("binunit", 1.0) == 1.0:
        length, width = length * 1e6, width * 1e6
    return value + terms[0] / length + terms[1] / width + terms[2] / (length * width)


def _map_other_level(model: Model, params: dict, level: int, element: Element) -> list[str]:
    given = model.params
    notes: list[str] = []
    bsim = level not in (2, 3)
    if not bsim:
        notes.append(f"level {level} evaluated with the level-1 square law; its extra effects are not modelled")
    else:
        notes.append("level 1 stands in for this BSIM-family card until BSIM is evaluated: the square law "
                     "with its level-1-equivalent parameters")
        if "lambda" in params and "lambda" in given:
            del params["lambda"]  # BSIM4's LAMBDA is velocity overshoot, not channel-length modulation
            params["lambda"] = MOS_DEFAULTS["lambda"]
    for src, dst, note in _MOS_MAP:
        if src in given and dst not in given:
            value = _binned(given, src, element) if bsim else given[src]
            if src == "u0" and value < 1.0:
                value *= 1e4  # BSIM gives U0 in m^2/Vs when below 1 (common practice)
            params[dst] = value
            notes.append(note)
    has_threshold = "vto" in given or "vth0" in given
    has_gain = "kp" in given or ("tox" in given or "toxe" in given) and ("uo" in given or "u0" in given)
    if not has_threshold or not has_gain:
        missing = []
        if not has_threshold:
            missing.append("a threshold (VTO or VTH0)")
        if not has_gain:
            missing.append("a gain (KP, or U0/UO with TOX/TOXE)")
        raise CircuitError(
            f"model {model.name!r} (level {level}) has no level-1 equivalent: it lacks {' and '.join(missing)}; "
            "supply the operating point with --op"
        )
    if bsim:
        length_um = element.params.get("l", MOS_INSTANCE["l"]) * 1e6
        params["lambda"] = 1.0 / (EARLY_VOLTS_PER_UM * length_um)
        notes.append(f"output conductance from a rough Early voltage of {EARLY_VOLTS_PER_UM:g} V per micron of L "
                     f"(LAMBDA={params['lambda']:.3g}/V)")
        if any(given.get(prefix + key) for key in ("vth0", "u0", "k1") for prefix in ("l", "w", "p")):
            notes.append("VTH0, U0 and K1 binned at the first instance's L and W")
    elif "lambda" not in given:
        notes.append("no LAMBDA: output conductance is zero (ideal current source outputs)")
    return notes


def bjt_parameters(model: Model, element: Element) -> dict:
    _lookup(model, element, set(BJT_TYPES), "npn or pnp")
    params = merged(BJT_DEFAULTS, model, BJT_ALIASES)
    for key in ("vaf", "var", "ikf", "ikr"):
        if params[key] == 0:
            params[key] = INF  # zero means 'not given' in SPICE for these
    return _validate(model, params, "bjt")


def diode_parameters(model: Model, element: Element) -> dict:
    _lookup(model, element, DIODE_TYPES, "a diode (d)")
    params = merged(DIODE_DEFAULTS, model, DIODE_ALIASES)
    if params["bv"] == 0:
        params["bv"] = INF
    return _validate(model, params, "diode")
