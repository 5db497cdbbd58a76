"""BSIM4's bias-dependent equations: the channel current, the substrate current and the
terminal charges (CAPMOD = 2), in the type-normalized frame, written from the BSIM4 technical
manual (University of California, Berkeley; versions 4.5-4.8) in our own code.

Every quantity is a :class:`~tauscan.devices.dual.Dual` over the three bias voltages
(vgs, vds, vbs) of the intrinsic device, so the conductances and the capacitance matrix come
out of the same formulas, exactly (no finite differences).  Section names follow the manual's
chapters: threshold voltage, effective gate overdrive, mobility, drain saturation voltage,
effective drain voltage, output resistance, substrate current, charge model, overlap.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from tauscan.devices import dual as ad
from tauscan.devices.bsim4_card import EPSSI, EXP_THRESHOLD, MAX_EXP, MIN_EXP, Q, Columns
from tauscan.devices.dual import Dual

DELTA_1 = 0.02  # overlap smoothing
DELTA_3 = 0.02  # flat-band smoothing (charge model)
DELTA_4 = 0.02  # drain-voltage smoothing (charge model)


@dataclass
class Channel:
    """The intrinsic device at one bias, per device (normalized frame; ``forward``: VDS >= 0)."""

    ids: Dual  # channel current from the effective drain to the effective source
    isub: Dual  # impact-ionization current from the effective drain into the body
    igidl: Dual  # gate-induced leakage from the physical drain into the body
    igisl: Dual  # gate-induced leakage from the physical source into the body
    forward: np.ndarray
    vth: np.ndarray
    vdsat: np.ndarray
    vgsteff: np.ndarray
    charges: dict[str, Dual] | None = None  # "g", "d", "s", "b": physical terminals


def _clamped_exp(x: Dual, lo: float = -EXP_THRESHOLD, hi: float = EXP_THRESHOLD) -> Dual:
    """exp(x) held at exp(+-threshold) outside the manual's range (flat there, as it is)."""
    inside = (x.v > lo) & (x.v < hi)
    flat = np.where(x.v <= lo, np.exp(lo), np.exp(hi))
    e = ad.exp(ad.where(inside, x, 0.0))
    return ad.where(inside, e, ad.const(flat, x))


def _half_csch2(x: Dual) -> Dual:
    """0.5 / (cosh(x) - 1), in the manual's guarded form."""
    small = x.v < EXP_THRESHOLD
    e = ad.exp(ad.where(small, x, 1.0))
    t = e / ((e - 1.0) * (e - 1.0) + 2.0 * e * MIN_EXP)
    return ad.where(small, t, 1.0 / (MAX_EXP - 2.0))


def _floor_one_plus(t: Dual) -> Dual:
    """1 + t, smoothly kept above 0 for t < -0.5 (the manual's (1 + 3t) / (3 + 8t))."""
    ok = t.v >= -0.5
    return ad.where(ok, lambda: 1.0 + t, lambda: (1.0 + 3.0 * t) / (3.0 + 8.0 * ad.where(ok, -0.25, t)))


def _keta_factor(t: Dual) -> Dual:
    """1 / (1 + t), continued as (17 + 20 t) / (0.8 + t) below t = -0.9 (the manual's guard)."""
    ok = t.v >= -0.9
    return ad.where(ok, lambda: 1.0 / (1.0 + ad.where(ok, t, 0.0)), lambda: (17.0 + 20.0 * t) / (0.8 + ad.where(ok, -0.85, t)))


def evaluate(p: Columns, vgs: Dual, vds: Dual, vbs: Dual, charges: bool) -> Channel:
    """Currents (and, if asked, the terminal charges) at the normalized terminal voltages."""
    with np.errstate(all="ignore"):
        return _evaluate(p, vgs, vds, vbs, charges)


def _evaluate(p: Columns, vgs_p: Dual, vds_p: Dual, vbs_p: Dual, charges: bool) -> Channel:
    fwd = vds_p.v >= 0.0
    vds = ad.where(fwd, vds_p, -vds_p)
    vgs = ad.where(fwd, vgs_p, vgs_p - vds_p)
    vbs = ad.where(fwd, vbs_p, vbs_p - vds_p)
    leff, weff0 = p["leff"], p["weff"]
    vtm = p["vtm"]
    phi, sqrtphi = p["phi"], p["sqrtphi"]

    # -- effective body bias ------------------------------------------------------------------
    # Everything up to the threshold's DIBL term depends on the body bias alone: it is evaluated
    # with one derivative (d/dvbs) and carried over to the three by the chain rule (promote).
    u = Dual(vbs.v.copy(), np.ones((1, len(vbs.v))))

    def promote(x: Dual) -> Dual:
        return Dual(x.v, vbs.d * x.d[0])

    vbsc = p["vbsc"]
    t0 = u - vbsc - 0.001
    t1 = ad.sqrt(t0 * t0 - 0.004 * vbsc)
    pos = t0.v >= 0.0
    vbseff = ad.where(pos, lambda: vbsc + 0.5 * (t0 + t1), lambda: vbsc * (1.0 + (-0.002) / (t1 - t0)))
    t9 = 0.95 * phi
    t0 = t9 - vbseff - 0.001
    vbseff = t9 - 0.5 * (t0 + ad.sqrt(t0 * t0 + 0.004 * t9))
    phis = phi - vbseff
    sqrtphis = ad.sqrt(phis)
    xdep = p["xdep0"] * sqrtphis / sqrtphi
    sqrt_xdep = ad.sqrt(xdep)

    # -- threshold voltage ---------------------------------------------------------------------
    v0 = p["vbi"] - phi
    lt1 = p["factor1"] * sqrt_xdep * _floor_one_plus(p["dvt2"] * vbseff)
    ltw = p["factor1"] * sqrt_xdep * _floor_one_plus(p["dvt2w"] * vbseff)
    theta0 = _half_csch2(p["dvt1"] * leff / lt1)
    delt_vth = p["dvt0"] * theta0 * v0
    t5 = _half_csch2(p["dvt1w"] * weff0 * leff / ltw)
    t2 = p["dvt0w"] * t5 * v0
    temp_ratio = p["tratio"] - 1.0
    lpe = np.sqrt(1.0 + p["lpe0"] / leff)
    t1 = p["k1ox"] * (lpe - 1.0) * sqrtphi + (p["kt1"] + p["kt1l"] / leff + p["kt2"] * vbseff) * temp_ratio
    vth_narrow = p["toxe"] * phi / (weff0 + p["w0"])
    t3 = p["eta0"] + p["etab"] * vbseff
    small = t3.v < 1e-4
    t3 = ad.where(small, lambda: (2e-4 - t3) / (3.0 - 2e4 * ad.where(small, t3, 0.0)), t3)
    lpe_vb = np.sqrt(1.0 + p["lpeb"] / leff)
    vth_body = (p["vth0_t"] + (p["k1ox"] * sqrtphis - p["k1"] * sqrtphi) * lpe_vb - p["k2ox"] * vbseff - delt_vth - t2
                + (p["k3"] + p["k3b"] * vbseff) * vth_narrow + t1)
    # subthreshold swing factor n, its body-bias part
    n_body = (p["nfactor"] * EPSSI / xdep + (p["cdsc"] + p["cdscb"] * vbseff) * theta0 + p["cit"]) / p["coxe"]
    # bulk charge factor Abulk, its body-bias parts
    t1 = 0.5 * p["k1ox"] * lpe_vb / sqrtphis + p["k2ox"] - p["k3b"] * vth_narrow
    t5 = leff / (leff + 2.0 * ad.sqrt(p["xj"] * xdep))
    abulk0_body = 1.0 + t1 * (p["a0"] * t5 + p["b0"] / (weff0 + p["b1"]))
    abulk_slope = t1 * (p["ags"] * p["a0"] * t5 * t5 * t5)
    keta = _keta_factor(p["keta"] * vbseff)

    vth = promote(vth_body) - promote(t3) * p["theta0vb0"] * vds
    n_arg = promote(n_body)
    if np.any(p["cdscd"]):
        n_arg = n_arg + (p["cdscd"] / p["coxe"]) * vds * promote(theta0)
    n = _floor_one_plus(n_arg)
    vbseff = promote(vbseff)
    sqrtphis = promote(sqrtphis)

    # -- pocket-implant threshold shift (DVTP0, DVTP1) ---------------------------------------
    if np.any(p["dvtp0"] > 0):
        e = _clamped_exp(-p["dvtp1"] * vds)
        t4 = vtm * ad.log(leff / (leff + p["dvtp0"] * (1.0 + e)))
        vth = vth - ad.where(p["dvtp0"] > 0, n * t4, 0.0)

    # -- poly-silicon gate depletion -------------------------------------------------------------
    vgs_eff = _poly_depletion(p, vgs)

    # -- effective gate overdrive Vgsteff (subthreshold to strong inversion, one expression) ---
    vgst = vgs_eff - vth
    nvt = n * vtm
    mstar = p["mstar"]
    arg = mstar * vgst / nvt
    big = arg.v > EXP_THRESHOLD
    tiny = arg.v < -EXP_THRESHOLD
    soft = nvt * ad.log(1.0 + ad.exp(ad.where(big | tiny, 0.0, arg)))
    num = ad.where(big, mstar * vgst, ad.where(tiny, vtm * np.log(1.0 + MIN_EXP) * n, soft))
    arg2 = (p["voffcbn"] - (1.0 - mstar) * vgst) / nvt
    inside = np.abs(arg2.v) <= EXP_THRESHOLD
    e2 = ad.where(inside, lambda: ad.exp(ad.where(inside, arg2, 0.0)),
                  lambda: ad.const(np.where(arg2.v < 0, MIN_EXP, MAX_EXP), arg2))
    den = mstar + n * (p["coxe"] / p["cdep0"]) * e2
    vgsteff = num / den

    # -- effective width with its bias dependence --------------------------------------------
    t9 = sqrtphis - sqrtphi
    if np.any(p["dwg"]) or np.any(p["dwb"]):
        weff = weff0 - 2.0 * (p["dwg"] * vgsteff + p["dwb"] * t9)
        narrow = weff.v < 2e-8
        weff = ad.where(narrow, lambda: 2e-8 * (4e-8 - weff) / (6e-8 - 2.0 * ad.where(narrow, weff, 0.0)), weff)
    else:
        weff = weff0

    # -- source/drain resistance inside the current equation (RDSMOD = 0) ---------------------
    t0 = 1.0 + p["prwg"] * vgsteff
    t2 = 1.0 / t0 + p["prwb"] * t9 if np.any(p["prwb"]) else 1.0 / t0
    rds = p["rdswmin"] + (t2 + ad.sqrt(t2 * t2 + 0.01)) * (p["rds0"] * 0.5)

    # -- bulk charge factor Abulk (its body-bias parts above) -------------------------------------
    abulk0 = promote(abulk0_body)
    abulk = abulk0 - promote(abulk_slope) * vgsteff
    abulk0 = _floor_abulk(abulk0)
    abulk = _floor_abulk(abulk)
    keta = promote(keta)
    abulk = abulk * keta
    abulk0 = abulk0 * keta

    # -- mobility (MOBMOD = 0) ------------------------------------------------------------------
    toxe = p["toxe"]
    t3 = (vgsteff + vth + vth) / toxe
    t5 = t3 * (p["ua"] + p["uc"] * vbseff + p["ub"] * t3)
    if np.any(p["ud"]):
        t10 = toxe / (vgsteff + 2.0 * ad.sqrt(vth * vth + 0.0001))
        t5 = t5 + p["ud"] * t10 * t10 * vth * vth
    ok = t5.v >= -0.8
    denomi = ad.where(ok, lambda: 1.0 + t5, lambda: (0.6 + t5) / (7.0 + 10.0 * ad.where(ok, 0.0, t5)))
    ueff = p["u0temp"] / denomi

    # -- drain saturation voltage -------------------------------------------------------------
    vsat = p["vsattemp"]
    wvcox = weff * vsat * p["coxe"]
    wvcoxrds = wvcox * rds
    esat = 2.0 * vsat / ueff
    esatl = esat * leff
    a1, a2 = p["a1"], p["a2"]

    def lam_pos():
        t0 = 1.0 - a2
        t1 = t0 - a1 * vgsteff - 0.0001
        return a2 + t0 - 0.5 * (t1 + ad.sqrt(t1 * t1 + 0.0004 * t0))

    def lam_neg():
        t1 = a2 + a1 * vgsteff - 0.0001
        return 0.5 * (t1 + ad.sqrt(t1 * t1 + 0.0004 * a2))

    lam = ad.where(a1 == 0.0, lambda: ad.const(a2, vgsteff), lambda: ad.where(a1 > 0.0, lam_pos, lam_neg))
    vgst2vtm = vgsteff + 2.0 * vtm
    t9 = abulk * wvcoxrds
    t7 = vgst2vtm * t9
    t6 = vgst2vtm * wvcoxrds
    t0 = 2.0 * abulk * (t9 - 1.0 + 1.0 / lam)
    t1 = vgst2vtm * (2.0 / lam - 1.0) + abulk * esatl + 3.0 * t7
    t2 = vgst2vtm * (esatl + 2.0 * t6)
    t3 = ad.sqrt(t1 * t1 - 2.0 * t0 * t2)
    plain = (rds.v == 0.0) & (lam.v == 1.0)
    vdsat = ad.where(plain, lambda: esatl * vgst2vtm / (abulk * esatl + vgst2vtm),
                     lambda: (t1 - t3) / ad.where(plain, 1.0, t0))

    # -- effective drain voltage -----------------------------------------------------------------
    delta = p["delta"]
    t1 = vdsat - vds - delta
    t2 = ad.sqrt(t1 * t1 + 4.0 * delta * vdsat)
    vdseff = vdsat - 0.5 * (t1 + t2)
    vdseff = ad.where(vds.v == 0.0, 0.0 * vds, vdseff)
    vdseff = ad.where(vdseff.v > vds.v, vds, vdseff)
    diff_vds = vds - vdseff

    # -- linear-region current with the charge centroid (Coxeff) -----------------------------
    tox2 = 2.0e8 * p["toxp"]
    t0 = (vgsteff + p["vtfbphi2"]) / tox2
    tmp3 = ad.exp(p["bdos"] * 0.7 * ad.log(t0))
    tcen = p["ados"] * 1.9e-9 / (1.0 + tmp3)
    coxeff = EPSSI * p["coxp"] / (EPSSI + p["coxp"] * tcen)
    beta = ueff * coxeff * weff / leff
    fgche1 = vgsteff * (1.0 - 0.5 * vdseff * abulk / vgst2vtm)
    fgche2 = 1.0 + vdseff / esatl
    gche = beta * fgche1 / fgche2
    idl = gche / (1.0 + gche * rds)  # a conductance: the current is idl * vdseff

    # -- output resistance: pocket (FPROUT), CLM, DIBL, DITS, SCBE --------------------------
    fprout = p["fprout"]
    fp = 1.0
    if np.any(fprout > 0):
        fp = ad.where(fprout > 0, lambda: 1.0 / (1.0 + fprout * np.sqrt(leff) / vgst2vtm), lambda: ad.const(1.0, vgsteff))
    pvag_term = 1.0
    if np.any(p["pvag"]):
        t9 = p["pvag"] / esatl * vgsteff
        okp = t9.v > -0.9
        pvag_term = ad.where(okp, lambda: 1.0 + t9, lambda: (0.8 + t9) / (17.0 + 20.0 * ad.where(okp, 0.0, t9)))
    clm_on = (p["pclm"] > MIN_EXP) & (diff_vds.v > 1e-10)
    cclm = fp * pvag_term * (1.0 + rds * idl) * (leff + vdsat / esat) / (p["pclm"] * p["litl"])
    cclm = ad.where(clm_on, cclm, MAX_EXP)
    vaclm = ad.where(clm_on, cclm * diff_vds, MAX_EXP)
    t8 = abulk * vdsat
    vadibl = (vgst2vtm - vgst2vtm * t8 / (vgst2vtm + t8)) / p["thetarout"]
    t7 = p["pdiblcb"] * vbseff
    okd = t7.v >= -0.9
    vadibl = vadibl * ad.where(okd, lambda: 1.0 / (1.0 + ad.where(okd, t7, 0.0)),
                               lambda: (17.0 + 20.0 * t7) / (0.8 + ad.where(okd, -0.85, t7)))
    vadibl = ad.where(p["thetarout"] > MIN_EXP, vadibl * pvag_term, MAX_EXP)
    tmp4 = 1.0 - 0.5 * abulk * vdsat / vgst2vtm
    vasat = (esatl + vdsat + 2.0 * wvcoxrds * vgsteff * tmp4) / (2.0 / lam - 1.0 + wvcoxrds * abulk)
    va = vasat + vaclm
    dits = p["pdits"] > MIN_EXP

    def _vadits():
        t0 = p["pditsd"] * vds
        e = ad.where(t0.v > EXP_THRESHOLD, MAX_EXP, lambda: ad.exp(ad.where(t0.v > EXP_THRESHOLD, 0.0, t0)))
        return (1.0 + (1.0 + p["pditsl"] * leff) * e) / np.where(dits, p["pdits"], 1.0) * fp

    vadits = ad.where(dits, _vadits, MAX_EXP) if np.any(dits) else None
    scbe_on = p["pscbe2"] > 0.0
    lim = p["pscbe1"] * p["litl"] / EXP_THRESHOLD
    far = diff_vds.v > lim
    vascbe = ad.where(far, lambda: leff * ad.exp(p["pscbe1"] * p["litl"] / ad.where(far, diff_vds, 1.0)) / p["pscbe2"],
                      lambda: ad.const(MAX_EXP * leff / np.where(scbe_on, p["pscbe2"], 1.0), vds))
    vascbe = ad.where(scbe_on, vascbe, MAX_EXP)
    idsa = idl * (1.0 + diff_vds / vadibl)
    idsa = idsa * (1.0 + ad.log(va / vasat) / cclm)
    if vadits is not None:
        idsa = idsa * (1.0 + diff_vds / vadits)
    scale = p["nf"] * p["m"]
    idsa = idsa * vdseff * scale  # (the current before SCBE, which the substrate current takes)
    ids = idsa * (1.0 + diff_vds / vascbe)

    # -- substrate current (impact ionization) --------------------------------------------------
    tmp = p["alpha0"] + p["alpha1"] * leff
    on = (tmp > 0.0) & (p["beta0"] > 0.0)
    t2 = np.where(on, tmp / leff, 0.0)
    # (a device with BETA0 <= 0 has none: kept out of the exponential, which would overflow)
    hot = on & (diff_vds.v > p["beta0"] / EXP_THRESHOLD)
    if np.any(on):
        factor = ad.where(hot, lambda: diff_vds * ad.exp(-p["beta0"] / ad.where(hot, diff_vds, 1.0)),
                          lambda: MIN_EXP * diff_vds)
        isub = (factor * t2) * idsa
    else:
        isub = 0.0 * vds

    # the poly-depleted gate-source voltage of the physical terminals is vgs_eff when forward
    igidl, igisl = _gate_induced_leakage(p, vgs_p, vds_p, vbs_p, scale, vgs_eff if fwd.all() else None)
    out = Channel(ids=ids, isub=isub, igidl=igidl, igisl=igisl, forward=fwd, vth=vth.v, vdsat=vdsat.v, vgsteff=vgsteff.v)
    if charges:
        out.charges = _charges(p, vgs_p, vds_p, vbs_p, fwd, vgs_eff, vbseff, vgst, n, abulk0, vds, scale)
    return out


def _gate_induced_leakage(p: Columns, vgs: Dual, vds: Dual, vbs: Dual, scale: np.ndarray,
                          vgs_eff: Dual | None = None) -> tuple[Dual, Dual]:
    """GIDL and GISL (the manual's original form): A W (V/3TOXE) exp(-B 3TOXE/V) with V the
    diffusion-to-gate voltage less E, times the body factor -Vbx^3 / (C - Vbx^3); zero when the
    junction is forward biased or a coefficient is not positive.  Found first by value alone
    (no derivatives) on the devices whose card has A > 0; evaluated on those that leak, and
    scattered back."""
    out = []
    for side in ("gidl", "gisl"):
        a, b, c, e = p["a" + side], p["b" + side], p["c" + side], p["e" + side]
        which = np.flatnonzero((a > 0) & (b > 0) & (c > 0))
        if which.size:
            which = which[_leaking(p, side, vgs.v[which], vds.v[which], vbs.v[which], which,
                                   None if vgs_eff is None else vgs_eff.v[which])]
        if which.size == 0:
            out.append(0.0 * vds)
            continue
        sub = {k: p[k][which] for k in ("vfb", "phi", "ngate", "coxe")}
        gs, ds, bs = vgs[which], vds[which], vbs[which]
        if side == "gidl":
            v_dg, vbx = ds - (vgs_eff[which] if vgs_eff is not None else _poly_depletion(sub, gs)), bs - ds
        else:
            v_dg, vbx = -ds - _poly_depletion(sub, gs - ds), bs
        a, b, c, e = a[which], b[which], c[which], e[which]
        t1 = (v_dg - e) / (3.0 * p["toxe"][which])
        t2 = b / t1
        big = t2.v >= 100.0
        i = (a * p["weffcj"][which] * scale[which]) * t1 * ad.where(big, 3.720075976e-44,
                                                                    lambda: ad.exp(-ad.where(big, 0.0, t2)))
        t5 = -vbx * vbx * vbx
        i = i * t5 / (c + t5)
        full = Dual(np.zeros_like(vds.v), np.zeros_like(vds.d))
        full.v[which] = i.v
        full.d[:, which] = i.d
        out.append(full)
    return out[0], out[1]


def _leaking(p: Columns, side: str, vgs: np.ndarray, vds: np.ndarray, vbs: np.ndarray, which: np.ndarray,
             vgs_eff: np.ndarray | None) -> np.ndarray:
    """Which of the devices ``which`` leak (positive field, junction not forward biased), by
    value alone: the same formulas on numbers without derivatives."""
    bare = [Dual(v, np.empty((0, len(v)))) for v in (vgs, vds)]
    sub = {k: p[k][which] for k in ("vfb", "phi", "ngate", "coxe")}
    if side == "gidl":
        eff = vgs_eff if vgs_eff is not None else _poly_depletion(sub, bare[0]).v
        v_dg, vbx = vds - eff, vbs - vds
    else:
        v_dg, vbx = -vds - _poly_depletion(sub, bare[0] - bare[1]).v, vbs
    return ((v_dg - p["e" + side][which]) > 0) & (vbx <= 0)


def _floor_abulk(a: Dual) -> Dual:
    low = a.v < 0.1
    return ad.where(low, lambda: (0.2 - a) / (3.0 - 20.0 * ad.where(low, a, 0.0)), a)


def _poly_depletion(p: Columns, vgs: Dual) -> Dual:
    """Gate voltage less the poly-silicon depletion drop (NGATE between 1e18 and 1e25 cm^-3)."""
    ngate = p["ngate"]
    phi_g = p["vfb"] + p["phi"]
    on = (ngate > 1e18) & (ngate < 1e25) & (vgs.v > phi_g)
    t1 = 1e6 * Q * EPSSI * np.where(on, ngate, 1.0) / (p["coxe"] * p["coxe"])
    t8 = ad.where(on, vgs - phi_g, 1.0)
    t4 = ad.sqrt(1.0 + 2.0 * t8 / t1)
    t2 = 2.0 * t8 / (t4 + 1.0)
    t3 = 0.5 * t2 * t2 / t1
    t7 = 1.12 - t3 - 0.05
    t6 = ad.sqrt(t7 * t7 + 0.224)
    t5 = 1.12 - 0.5 * (t7 + t6)
    return ad.where(on, vgs - t5, vgs)


def _charges(p: Columns, vgs_p: Dual, vds_p: Dual, vbs_p: Dual, fwd: np.ndarray, vgs_eff: Dual, vbseff: Dual,
             vgst: Dual, n: Dual, abulk0: Dual, vds: Dual, scale: np.ndarray) -> dict[str, Dual]:
    """Terminal charges of the charge-thickness model (CAPMOD = 2) plus the overlaps (C)."""
    vtm = p["vtm"]
    # gate overdrive for the charges, with its own offset and slope (NOFF, VOFFCV)
    noff_vt = n * p["noff"] * vtm
    arg = (vgst - p["voffcv"]) / noff_vt
    big = arg.v > EXP_THRESHOLD
    tiny = arg.v < -EXP_THRESHOLD
    vgsteff = ad.where(big, vgst - p["voffcv"],
                       ad.where(tiny, noff_vt * np.log(1.0 + MIN_EXP),
                                noff_vt * ad.log(1.0 + ad.exp(ad.where(big | tiny, 0.0, arg)))))
    vbseffcv = vbseff
    vfbzb = p["vfbzb"]
    cox_wl = p["coxe"] * p["weffcv"] * p["leffcv"] * scale
    coxp = p["coxp"]
    v3 = vfbzb - vgs_eff + vbseffcv - DELTA_3
    t0 = ad.sqrt(v3 * v3 + np.where(vfbzb <= 0.0, -4.0, 4.0) * DELTA_3 * vfbzb)
    vfbeff = vfbzb - 0.5 * (v3 + t0)

    tox = 1.0e8 * p["toxp"]
    tmp = (vgs_eff - vbseffcv - vfbzb) / tox * p["acde"]
    tcen = p["ldeb"] * ad.where(tmp.v <= -EXP_THRESHOLD, MIN_EXP,
                                ad.where(tmp.v >= EXP_THRESHOLD, MAX_EXP,
                                         ad.exp(ad.where(np.abs(tmp.v) < EXP_THRESHOLD, tmp, 0.0))))
    link = 1.0e-3 * p["toxp"]
    v3 = p["ldeb"] - tcen - link
    v4 = ad.sqrt(v3 * v3 + 4.0 * link * p["ldeb"])
    tcen = p["ldeb"] - 0.5 * (v3 + v4)
    ccen = EPSSI / tcen
    coxeff = coxp * ccen / (coxp + ccen)
    cox_wl_cen = cox_wl * coxeff / p["coxe"]
    qac0 = cox_wl_cen * (vfbeff - vfbzb)

    k1ox = p["k1ox"]
    t0 = 0.5 * k1ox
    t3 = vgs_eff - vfbeff - vbseffcv - vgsteff
    neg = t3.v < 0.0
    safe_k1 = np.where(k1ox == 0.0, 1.0, k1ox)
    t1 = ad.where(neg, t0 + t3 / safe_k1, ad.sqrt(t0 * t0 + ad.where(neg, 0.0, t3)))
    qsub0 = ad.where(k1ox == 0.0, 0.0 * t3, cox_wl_cen * k1ox * (t1 - t0))

    # gate-bias dependent surface potential shift DeltaPhi
    pos_k1 = k1ox > 0.0
    denomi = np.where(pos_k1, p["moin"] * vtm * k1ox * k1ox, 0.25 * p["moin"] * vtm)
    t0 = np.where(pos_k1, k1ox * p["sqrtphi"], 0.5 * p["sqrtphi"])
    delta_phi = vtm * ad.log(1.0 + (2.0 * t0 + vgsteff) * vgsteff / denomi)
    t0 = vgsteff - delta_phi - 0.001
    vgdp = 0.5 * (t0 + ad.sqrt(t0 * t0 + vgsteff * 0.004))

    # inversion charge centroid
    t0 = (vgsteff + p["vtfbphi2"]) / (2.0 * tox)
    tmp = ad.exp(p["bdos"] * 0.7 * ad.log(t0))
    tcen = p["ados"] * 1.9e-9 / (1.0 + tmp)
    ccen = EPSSI / tcen
    coxeff = coxp * ccen / (coxp + ccen)
    cox_wl_cen = cox_wl * coxeff / p["coxe"]

    abulk_cv = abulk0 * p["abulkcv_factor"]
    vdsat_cv = vgdp / abulk_cv
    t0 = vdsat_cv - vds - DELTA_4
    t1 = ad.sqrt(t0 * t0 + 4.0 * DELTA_4 * vdsat_cv)
    above = t0.v >= 0.0
    t3 = 2.0 * DELTA_4 / (t1 - t0)
    vdseff_cv = ad.where(above, vdsat_cv - 0.5 * (t0 + t1), vdsat_cv * (1.0 - t3))
    vdseff_cv = ad.where(vds.v == 0.0, 0.0 * vds, vdseff_cv)

    t0 = abulk_cv * vdseff_cv
    t1 = vgdp
    t2 = 12.0 * (t1 - 0.5 * t0 + 1e-20)
    t3 = t0 / t2
    qgate = cox_wl_cen * (t1 - t0 * (0.5 - t3))
    qbulk = cox_wl_cen * (1.0 - abulk_cv) * (0.5 * vdseff_cv - t0 * vdseff_cv / t2)
    xpart = p["xpart"]
    q_0_100 = -cox_wl_cen * (t1 / 2.0 + t0 / 4.0 - 0.5 * t0 * t0 / t2)
    t2b = t2 / 12.0
    t4 = t1 * (2.0 * t0 * t0 / 3.0 + t1 * (t1 - 4.0 * t0 / 3.0)) - 2.0 * t0 * t0 * t0 / 15.0
    q_40_60 = -(0.5 * cox_wl_cen / (t2b * t2b)) * t4
    qsrc = ad.where(xpart > 0.5, q_0_100, ad.where(xpart < 0.5, q_40_60, -0.5 * qgate))
    qgate = qgate + qac0 + qsub0 - qbulk
    qbulk = qbulk - (qac0 + qsub0)
    qdrn = -(qgate + qbulk + qsrc)
    # the intrinsic drain and source charges belong to the effective terminals
    qd_phys = ad.where(fwd, qdrn, qsrc)
    qs_phys = ad.where(fwd, qsrc, qdrn)

    # overlaps (bias dependent through CGSL, CGDL) and the gate-bulk overlap, per physical side
    vgd_p = vgs_p - vds_p
    m = scale
    qgso = _overlap(vgs_p, p["cgso_w"] * m, p["weffcv"] * p["cgsl"] * m, p["ckappas"])
    qgdo = _overlap(vgd_p, p["cgdo_w"] * m, p["weffcv"] * p["cgdl"] * m, p["ckappad"])
    qgbo = p["cgbo_l"] * m * (vgs_p - vbs_p)
    return {"g": qgate + qgso + qgdo + qgbo, "d": qd_phys - qgdo, "s": qs_phys - qgso, "b": qbulk - qgbo}


def _overlap(v: Dual, c0: np.ndarray, cl: np.ndarray, kappa: np.ndarray) -> Dual:
    """Overlap charge at gate-to-diffusion voltage v: constant C0 plus CGxL's bias dependence."""
    t0 = v + DELTA_1
    t1 = ad.sqrt(t0 * t0 + 4.0 * DELTA_1)
    t2 = 0.5 * (t0 - t1)
    t4 = ad.sqrt(1.0 - 4.0 * t2 / kappa)
    return (c0 + cl) * v - cl * (t2 + 0.5 * kappa * (t4 - 1.0))
