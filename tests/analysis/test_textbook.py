"""Worked formulas from textbooks.

- Common-source stage with source resistance R_S, load R_D and capacitances
  C_GS, C_GD, C_DB (Razavi, Design of Analog CMOS ICs, 2nd ed., ch. 6):
  D(s) = 1 + b1 s + b2 s^2 with
  b1 = R_S (1 + g_m R_D) C_GD + R_S C_GS + R_D (C_GD + C_DB),
  b2 = R_S R_D (C_GS C_GD + C_GS C_DB + C_GD C_DB).
- Common-emitter stage: the resistance seen by C_mu is R_S' + R_L' + g_m R_S' R_L'
  with R_S' = R_S || r_pi and R_L' = R_L || r_o (Gray, Hurst, Lewis, Meyer, 5th ed., ch. 7).
"""

import numpy as np
from numpy.testing import assert_allclose

from tauscan.analysis import AnalysisSettings
from tests.analysis.helpers import scan_text

RS, RD, GM, CGS, CGD, CDB = 20e3, 10e3, 2e-3, 50e-15, 10e-15, 30e-15


def cs_linear():
    # the small-signal common-source stage itself, with a VCCS for g_m
    return (f"common-source small-signal model\nVin src 0 dc 0 ac 1\nRs src g {RS}\nGm d 0 g 0 {GM}\nRd d 0 {RD}\n"
            f"Cgs g 0 {CGS}\nCgd g d {CGD}\nCdb d 0 {CDB}\n")


def test_common_source_b1_and_both_poles(write):
    r = scan_text(write, cs_linear())
    b1 = RS * (1 + GM * RD) * CGD + RS * CGS + RD * (CGD + CDB)
    b2 = RS * RD * (CGS * CGD + CGS * CDB + CGD * CDB)
    # GMIN (1e-12 S) at both nodes shifts the figures by ~1e-8 relative
    assert_allclose(r.sum_tau_s, b1, rtol=1e-7)
    exact = np.roots([b2, b1, 1.0])
    assert_allclose(sorted(np.abs(r.poles)), sorted(np.abs(exact)), rtol=1e-7)
    assert r.poles_complete and len(r.poles) == 2
    # the Miller term is the one on the gate-drain capacitor
    cgd = r.capacitor("cgd")
    assert_allclose(cgd.tau_s, RS * (1 + GM * RD) * CGD + RD * CGD, rtol=1e-7)
    assert_allclose(cgd.gain, -GM * RD, rtol=1e-7)


def test_common_source_with_a_real_mosfet(write):
    # the same formula with g_m, r_o and the capacitances the level-1 model gives at its bias
    text = ("cs stage\nVdd vdd 0 1.8\nVin src 0 dc 0.8 ac 1\nRs src g 20k\nRd vdd d 10k\nM1 d g 0 0 mn w=10u l=1u\n"
            ".model mn nmos (vto=0.5 kp=100u lambda=0.05 tox=10n cgdo=0.5n cj=0.5m)\n"
            "* drain area for a junction capacitance\n".replace("w=10u l=1u", "w=10u l=1u ad=10p"))
    r = scan_text(write, text)
    from tauscan import api

    m = api.bias(api.read(write(text))).device("m1")
    gm, gds = m.values["gm"], m.values["gds"]
    rd = 1 / (1 / 10e3 + gds)
    cgs, cgd = m.caps["cgs"], m.caps["cgd"]
    cdb = m.caps["cbd"]  # bulk at ground: C_DB = C_BD
    b1 = 20e3 * (1 + gm * rd) * cgd + 20e3 * cgs + rd * (cgd + cdb) + m.caps["cgb"] * 20e3
    assert_allclose(r.sum_tau_s, b1, rtol=1e-6)


def test_common_emitter_c_mu_resistance(write):
    text = ("ce stage\nVcc vcc 0 5\nVin src 0 dc 0.68 ac 1\nRs src b 2k\nRl vcc c 5k\nQ1 c b 0 qn\n"
            ".model qn npn (is=1e-16 bf=100 vaf=60 cjc=0.3p cje=0.5p)\n")
    r = scan_text(write, text)
    from tauscan import api

    q = api.bias(api.read(write(text))).device("q1")
    gm, gpi, go = q.values["gm"], q.values["gpi"], q.values["go"]
    rs_p = 1 / (1 / 2e3 + gpi)
    rl_p = 1 / (1 / 5e3 + go)
    expected = rs_p + rl_p + gm * rs_p * rl_p
    # the model's tiny g_mu (reverse-biased base-collector, ~1e-19 S) and GMIN are the only differences
    assert_allclose(r.capacitor("q1:cbc").ohms, expected, rtol=1e-6)


def test_selected_inversion_agrees_with_column_solves(write):
    text = cs_linear() + "Rx d e 1k\nCx e 0 5f\nCy e g 2f\n"
    a = scan_text(write, text, settings=AnalysisSettings(z_method="columns"))
    b = scan_text(write, text, settings=AnalysisSettings(z_method="selected"))
    assert a.methods["z"] == "columns" and b.methods["z"] == "selected"
    for ca in a.capacitors:
        cb = b.capacitor(ca.name)
        assert_allclose([cb.tau_s, cb.ohms], [ca.tau_s, ca.ohms], rtol=1e-10)
        if ca.gain is not None:
            assert_allclose(cb.gain, ca.gain, rtol=1e-10)
