"""Gummel-Poon bipolar against the forward-active closed forms
(Gray, Hurst, Lewis, Meyer, Analysis and Design of Analog ICs, 5th ed., ch. 1):
IC = IS exp(VBE/VT)(1 + VCB/VAF), gm = IC/VT, r_pi = BF/gm."""

import math

import pytest
from numpy.testing import assert_allclose
from scipy import constants

from tauscan.devices.physics import thermal_voltage
from tauscan.op import solve_dc
from tauscan.reader import read_netlist

VT = constants.k * (27 + 273.15) / constants.e  # CODATA 2018 exact k and q


def test_thermal_voltage_from_codata():
    assert_allclose(thermal_voltage(27.0), VT, rtol=1e-15)
    assert_allclose(thermal_voltage(27.0), 0.025864, rtol=1e-4)  # the familiar 25.9 mV (from memory)


def ce(write, vaf="", extra=""):
    return read_netlist(write(
        "common-emitter bias point\nVcc c 0 3\nVb b 0 0.65\nQ1 c b 0 qn\n"
        f".model qn npn (is=1e-16 bf=120 {vaf} {extra})\n"
    ))


def test_collector_current_with_early_effect(write):
    op = solve_dc(ce(write, "vaf=50"))
    q = op.device("q1")
    assert q.region == "forward-active"
    vcb = 3 - 0.65
    ic = 1e-16 * (math.exp(0.65 / VT) - 1) * (1 + vcb / 50)
    # the Gummel-Poon base charge q1 = 1/(1 - VBC/VAF) gives exactly this form; the
    # reverse term IS/BR (e^{VBC/VT} - 1) adds 1e-16/1 = 1e-16 A
    assert_allclose(q.current, ic + 1e-16, rtol=1e-9)


def test_gm_and_rpi(write):
    op = solve_dc(ce(write))
    q = op.device("q1")
    ic = q.current
    assert_allclose(q.values["gm"], ic / VT, rtol=1e-6)
    assert_allclose(1 / q.values["gpi"], 120 / q.values["gm"], rtol=1e-6)
    assert abs(q.values["go"]) < 1e-15  # no Early effect


def test_output_conductance_from_vaf(write):
    op = solve_dc(ce(write, "vaf=50"))
    q = op.device("q1")
    # at constant VBE, dIC/dVCE = IS exp(VBE/VT)/VAF, so ro = (VAF + VCB)/IC: the
    # textbook ro = VA/IC (Gray et al. ch. 1) with VA measured from the bias point
    assert_allclose(1 / q.values["go"], (50 + 3 - 0.65) / q.current, rtol=1e-6)


def test_high_injection_reduces_gm(write):
    low = solve_dc(ce(write)).device("q1")
    high = solve_dc(ce(write, extra="ikf=1e-5")).device("q1")
    assert high.current < low.current
    assert high.values["gm"] < high.current / VT


def test_pnp_and_capacitances(write):
    c = read_netlist(write(
        "pnp\nVee e 0 3\nVb b 0 2.35\nRc c 0 1k\nQ1 c b e qp\n"
        ".model qp pnp (is=1e-16 bf=80 cje=1p vje=0.8 mje=0.4 cjc=0.5p vjc=0.7 mjc=0.33 tf=100p cjs=0.2p)\n"
    ))
    op = solve_dc(c)
    q = op.device("q1")
    assert q.region == "forward-active"
    assert q.current < 0  # collector current flows out of a pnp collector
    ic = abs(q.current)
    vcb = op.voltage("c") - 2.35  # collector-base reverse bias of the pnp is VBC > 0 ... normalized
    # cbe = TF gm + CJE/(1 - VBE/VJE)^MJE with normalized VBE = VE - VB = 0.65 > FC*VJE = 0.4
    vbe = 0.65
    cje = 1e-12 / (1 - 0.5) ** 1.4 * (1 - 0.5 * 1.4 + 0.4 * vbe / 0.8)
    assert_allclose(q.caps["cbe"], 100e-12 * ic / VT + cje, rtol=1e-4)
    vbc = -(2.35 - op.voltage("c"))  # normalized VBC for a pnp: VC - VB
    assert_allclose(q.caps["cbc"], 0.5e-12 / (1 - vbc / 0.7) ** 0.33, rtol=1e-9)
    assert q.caps["ccs"] == pytest.approx(0.2e-12)  # MJS = 0: constant
    assert vcb < 0


def test_saturation_region(write):
    c = read_netlist(write("sat\nVcc vcc 0 3\nRc vcc c 100k\nVb b 0 0.75\nQ1 c b 0 qn\n.model qn npn (is=1e-16 bf=100)\n"))
    assert solve_dc(c).device("q1").region == "saturation"


def test_series_resistances_make_internal_nodes(write):
    c = read_netlist(write("rb\nVcc c 0 3\nVb b 0 0.7\nQ1 c b 0 qn\n.model qn npn (is=1e-16 bf=100 rb=500 re=2 rc=10)\n"))
    op = solve_dc(c)
    q = op.device("q1")
    assert q.nodes["b"] == "q1#b" and q.nodes["e"] == "q1#e"
    ib = q.bias["ib"]
    vbi = op.x[op.network.node("q1#b")]
    # RB carries the base current plus the GMIN (1e-12 S, METHOD) current of the internal node
    assert_allclose(op.voltage("b") - vbi, (ib + 1e-12 * vbi) * 500, rtol=1e-9)
