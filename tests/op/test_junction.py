"""Junction law and depletion capacitance (Nagel 1975; Antognetti and Massobrio 1993, ch. 1):
C = CJ0/(1 - V/PB)^M below FC*PB, and CJ0/(1-FC)^(1+M) (1 - FC(1+M) + M V/PB) above."""

import math

import numpy as np
from numpy.testing import assert_allclose
from scipy.optimize import brentq

from tauscan.devices.physics import depletion_capacitance, pnjlim, scale_saturation_current, thermal_voltage
from tauscan.op import solve_dc
from tauscan.reader import read_netlist


def test_depletion_capacitance_both_sides_of_fc_pb():
    cj0, pb, m, fc = 1e-12, 0.8, 0.5, 0.5
    v = np.array([-5.0, -1.0, 0.0, 0.3, 0.4, 0.6, 0.9])
    got = depletion_capacitance(v, np.full(v.shape, cj0), pb, m, fc)
    expect = []
    for x in v:
        if x < fc * pb:
            expect.append(cj0 / (1 - x / pb) ** m)
        else:
            expect.append(cj0 / (1 - fc) ** (1 + m) * (1 - fc * (1 + m) + m * x / pb))
    assert_allclose(got, expect, rtol=1e-14)
    # hand values: at -1 V, 1p/sqrt(2.25) = 0.6667p; at 0.6 V, 2.828p*(0.25+0.375) = 1.7678p
    assert_allclose(got[1], 1e-12 / 1.5, rtol=1e-12)
    assert_allclose(got[5], 1e-12 / 0.5**1.5 * 0.625, rtol=1e-12)
    # continuous at FC*PB
    below = depletion_capacitance(np.array([0.4 - 1e-9]), np.array([cj0]), pb, m, fc)
    assert_allclose(below, got[4], rtol=1e-7)


def test_diode_resistor_operating_point(write):
    # VDD = ID R + N VT ln(ID/IS + 1), solved independently with brentq
    c = read_netlist(write("diode\nV1 a 0 5\nR1 a k 1k\nD1 k 0 dm\n.model dm d (is=1e-14 n=1.5 cjo=2p vj=0.7 m=0.5 tt=1n)\n"))
    op = solve_dc(c)
    vt = thermal_voltage(27.0)
    i = brentq(lambda i: 5 - i * 1e3 - 1.5 * vt * math.log(i / 1e-14 + 1), 1e-9, 5e-3, xtol=1e-18)
    d = op.device("d1")
    assert_allclose(d.current, i, rtol=1e-7)
    gd = (i + 1e-14) / (1.5 * vt)
    assert_allclose(d.values["gd"], gd, rtol=1e-7)
    vd = op.voltage("k")
    cj = 2e-12 / 0.5**1.5 * (1 - 0.75 + 0.5 * vd / 0.7)  # forward bias above FC*VJ
    assert_allclose(d.caps["cj"], 1e-9 * gd + cj, rtol=1e-7)


def test_limiting_keeps_junction_steps_logarithmic():
    vt = np.array([0.025])
    vcrit = np.array([0.6])
    out, changed = pnjlim(np.array([5.0]), np.array([0.7]), vt, vcrit)
    assert changed[0] and 0.7 < out[0] < 0.9
    out, changed = pnjlim(np.array([0.65]), np.array([0.64]), vt, vcrit)
    assert not changed[0] and out[0] == 0.65


def test_saturation_current_temperature_scaling():
    # IS(T) = IS (T/T0)^XTI exp((T/T0 - 1) EG/VT): about doubles every 5 K near room
    # temperature for silicon (common practice)
    hot = scale_saturation_current(1e-16, 32.0, 27.0, 1.11, 3.0, 1.0)
    assert 1.8 < hot / 1e-16 < 2.4
    assert scale_saturation_current(1e-16, 27.0, 27.0, 1.11, 3.0, 1.0) == 1e-16


def test_series_resistances_of_diode_and_mosfet(write):
    # Ohm's law across each series resistance: the internal node sits I*R away (plus GMIN current)
    c = read_netlist(write("rs\nV1 a 0 5\nR1 a k 1k\nD1 k 0 dm\n.model dm d (is=1e-14 rs=50)\n"
                           "Vdd vdd 0 1.8\nRd vdd d 5k\nM1 d vdd 0 0 mn w=10u l=1u\n.model mn nmos (vto=0.5 kp=100u rd=200 rs=100)\n"))
    op = solve_dc(c)
    d = op.device("d1")
    vk, vai = op.voltage("k"), op.x[op.network.node("d1#a")]
    assert_allclose(vk - vai, (d.current + 1e-12 * vai) * 50, rtol=1e-6)
    m = op.device("m1")
    vd, vdi = op.voltage("d"), op.x[op.network.node("m1#d")]
    vsi = op.x[op.network.node("m1#s")]
    assert_allclose(vd - vdi, (m.current + 1e-12 * vdi) * 200, rtol=1e-6)
    assert_allclose(vsi, (m.current - 1e-12 * vsi) * 100, rtol=1e-5)
