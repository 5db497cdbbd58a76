"""Miller's theorem (J. M. Miller, Sci. Papers Bur. Standards 15, 1920): a capacitor C
across an ideal inverting voltage amplifier of gain -A looks (1 + A) C from the input;
the output side sees about C for a one-way stage (common practice); a follower's
capacitor is reduced by (1 - A), never multiplied."""

import pytest
from numpy.testing import assert_allclose

from tests.analysis.helpers import scan_text

GMIN = 1e-12  # METHOD: every node has GMIN to ground


def amplifier(gain, rs="10k", ro="100", cf="1p"):
    return (f"ideal voltage amplifier of gain {gain}\n"
            f"Vin src 0 dc 0 ac 1\nRs src in {rs}\nE1 x 0 in 0 {gain}\nRo x out {ro}\n"
            f"Cf in out {cf}\nRl out 0 1g\n")


@pytest.mark.parametrize("a", [1.0, 10.0, 100.0, 1000.0])
def test_inverting_gain_multiplies_by_one_plus_a(write, a):
    r = scan_text(write, amplifier(-a))
    cap = r.capacitor("cf")
    assert cap.klass == "miller" and cap.node_in == "in" and cap.node_out == "out"
    # the open-circuit gain from 'in' to 'out' is -A, reduced only by Ro against Rl (1 GOhm)
    # and GMIN; tolerance covers that loading (about 1e-7)
    assert_allclose(cap.gain, -a, rtol=1e-6)
    assert_allclose(cap.factor_in, 1 + a, rtol=1e-6)
    # one-way stage: driving the output does not move the input, so the output side sees C
    assert_allclose(cap.factor_out, 1.0, atol=1e-9)
    # R = Rs (1 + A) + Ro: the resistance the capacitor sees (Thornton et al. 1965)
    assert_allclose(cap.ohms, 10e3 * (1 + a) + 100 * 1e9 / (1e9 + 100), rtol=1e-6)
    node = r.node("in")
    # the Miller part C Rs A of the node's C Rs (1 + A): share A/(1+A)
    assert_allclose(node.miller_tau_s, 1e-12 * 10e3 * a, rtol=1e-6)
    assert_allclose(node.miller_share, a / (1 + a), rtol=1e-6)
    assert node.miller_dominated == (a > 1)


def test_bilateral_amplifier_output_factor(write):
    # forward gain -Af (g_f into Ro) and reverse gain -Ar (g_r into Rs): by the 2x2 nodal
    # inverse, driving 'out' moves 'in' by -Ar, so factor_out = 1 + Ar; an ideal bilateral
    # amplifier has Ar = 1/Af, giving METHOD's 1 + 1/A (here Ar is kept below 1/Af so that
    # the loop gain Af*Ar stays below 1)
    af, ar = 50.0, 0.01
    text = (f"bilateral\nVin src 0 dc 0 ac 1\nRs src in 1k\nGf out 0 in 0 {af / 1e3}\nRo out 0 1k\n"
            f"Gr in 0 out 0 {ar / 1e3}\nCf in out 1p\n")
    r = scan_text(write, text)
    cap = r.capacitor("cf")
    rs = 1 / (1 / 1e3 + 1e-12)  # Rs to the AC-grounded source, in parallel with GMIN
    assert cap.klass == "miller" and cap.node_in == "in"
    assert_allclose(cap.gain, -af * (1 / (1 + 1e3 * 1e-12)), rtol=1e-8)
    assert_allclose(cap.factor_out, 1 + ar / 1e3 * rs, rtol=1e-8)


def test_follower_is_bootstrapped_never_multiplied(write):
    r = scan_text(write, amplifier(0.9))
    cap = r.capacitor("cf")
    assert cap.klass == "bootstrap"
    assert_allclose(cap.factor_in, 1 - 0.9, rtol=1e-6)
    assert cap.miller_excess_s == 0
    assert r.node("in").miller_tau_s == 0


def test_gain_above_one_is_regenerative(write):
    r = scan_text(write, amplifier(2.0))
    cap = r.capacitor("cf")
    assert cap.klass == "regenerative"
    assert cap.factor_in < 0  # the input sees a negative capacitance
    assert_allclose(cap.factor_in, -1.0, rtol=1e-6)


def test_grounded_capacitor_and_ac_ground(write):
    r = scan_text(write, "t\nVin a 0 dc 0 ac 1\nR1 a b 2k\nC1 b 0 3p\nC2 a 0 1p\nVdd vdd 0 1\nC3 vdd 0 1p\n")
    c1 = r.capacitor("c1")
    assert c1.klass == "grounded" and c1.node_out == "0" and c1.gain is None and c1.factor_out is None
    assert_allclose(c1.tau_s, 2e3 * 3e-12 / (1 + 2e3 * GMIN), rtol=1e-12)
    assert {"c2", "c3"} <= set(r.excluded)  # both ends at AC ground: no time constant
    assert "c2" not in [c.name for c in r.capacitors]


def test_what_if_cascoded_and_removed(write):
    r = scan_text(write, amplifier(-100) + "Cin in 0 1p\n")
    cap = r.capacitor("cf")
    total = r.sum_tau_s
    assert_allclose(cap.octc_hz_if_removed, 1 / (2 * 3.141592653589793 * (total - cap.tau_s)), rtol=1e-12)
    # gain cut to -1: the input part becomes 2 C Zin; the output part is unchanged
    zin = 10e3
    new_tau = total - cap.tau_s + 2 * 1e-12 * zin + cap.part_out_s
    assert_allclose(cap.octc_hz_if_cascoded, 1 / (2 * 3.141592653589793 * new_tau), rtol=1e-6)
    assert r.capacitor("cin").octc_hz_if_cascoded is None
