"""The mid-band circuit and the signal path (METHOD sections 6 and 7) against sources outside
the project.

- A common-emitter stage with coupling and bypass capacitors: the short-circuit time
  constants of the low band and the open-circuit ones of the high band against the closed
  forms of the textbook treatment (Gray, Hurst, Lewis and Meyer, "Analysis and Design of
  Analog Integrated Circuits", 5th ed., ch. 7; Sedra and Smith, "Microelectronic Circuits",
  frequency-response chapter), and both exact corners against scipy.signal on the transfer
  derived in the test with sympy from the nodal equations.
- The same amplifier in three open-loop testbenches (LC, DC servo, DC source at its
  operating point) gives the same tables.
- Identities on random networks (hypothesis): T_k = tau_k (1 - H^k / H0) with H^k from a
  nodal system built in the test with capacitor k shorted (Hajimiri, "Generalized Time- and
  Transfer-Constant Circuit Analysis", IEEE TCAS-I 57(6), 2010); sum T = sum over nodes =
  -H'(0)/H(0) by a complex-step difference of the exact transfer; T = 0 off the path.
"""

from __future__ import annotations

import math
import re

import numpy as np
import pytest
import scipy.signal as signal
import sympy
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose

from tauscan import api
from tauscan.analysis import AnalysisSettings
from tauscan.analysis.band import BandRequest

from tests.analysis.test_identities import GMIN, networks, nodal, to_netlist
from tests.conftest import SAMPLES, examples

# --------------------------------------------------------------------------------------
# Common-emitter stage (hybrid-pi, r_o left out as in the textbook treatment)

CE = dict(rsig=1e3, rb=50e3, rpi=2.5e3, gm=40e-3, re=1e3, rc=5e3, rl=10e3,
          c1=10e-6, ce=100e-6, c2=10e-6, cpi=10e-12, cmu=1e-12)

CE_NETLIST = """common-emitter stage, coupling and bypass capacitors (hybrid-pi)
Vsig sig 0 dc 0 ac 1
Rsig sig a {rsig!r}
C1 a b {c1!r}
RB b 0 {rb!r}
Rpi b e {rpi!r}
Cpi b e {cpi!r}
Cmu b c {cmu!r}
G1 c e b e {gm!r}
RE e 0 {re!r}
CE e 0 {ce!r}
RC c 0 {rc!r}
C2 c out {c2!r}
RL out 0 {rl!r}
.end
"""


def par(*rs):
    return 1.0 / sum(1.0 / r for r in rs)


def ce_transfer():
    """H(s) = v(out) / v(sig) from the nodal equations, solved by sympy (exact rationals)."""
    s = sympy.symbols("s")
    p = {k: sympy.nsimplify(v) for k, v in CE.items()}
    a, b, e, c, o = sympy.symbols("a b e c o")
    vs = 1
    eqs = [
        (a - vs) / p["rsig"] + s * p["c1"] * (a - b),
        s * p["c1"] * (b - a) + b / p["rb"] + (b - e) / p["rpi"] + s * p["cpi"] * (b - e) + s * p["cmu"] * (b - c),
        (e - b) / p["rpi"] + s * p["cpi"] * (e - b) + e / p["re"] + s * p["ce"] * e - p["gm"] * (b - e),
        s * p["cmu"] * (c - b) + c / p["rc"] + s * p["c2"] * (c - o) + p["gm"] * (b - e),
        s * p["c2"] * (o - c) + o / p["rl"],
    ]
    h = sympy.solve(eqs, [a, b, e, c, o], dict=True)[0][o]
    num, den = sympy.fraction(sympy.together(sympy.simplify(h)))
    return sympy.Poly(num, s), sympy.Poly(den, s)


def zpk_edges(num, den):
    """Mid-band gain and both -3 dB edges of |H| by bisection on scipy.signal.freqs_zpk."""
    z = np.array([complex(r) for r in sympy.Poly(num).nroots(n=20, maxsteps=500)]) if num.degree() > 0 else np.array([])
    p = np.array([complex(r) for r in sympy.Poly(den).nroots(n=20, maxsteps=500)])
    k = float(num.LC() / den.LC())

    def mag(f):
        return abs(signal.freqs_zpk(z, p, k, worN=[2 * math.pi * f])[1][0])

    freqs = np.logspace(-2, 9, 500)
    mags = np.array([mag(f) for f in freqs])
    peak = mags.max()
    level = peak / math.sqrt(2)
    top = int(np.argmax(mags))

    def edge(lo, hi, rising):
        lo, hi = math.log(lo), math.log(hi)
        for _ in range(200):
            mid = 0.5 * (lo + hi)
            above = mag(math.exp(mid)) > level
            lo, hi = (lo, mid) if above == rising else (mid, hi)
        return math.exp(0.5 * (lo + hi))

    low = next(i for i in range(top, -1, -1) if mags[i] < level)
    high = next(i for i in range(top, len(freqs)) if mags[i] < level)
    return peak, edge(freqs[low], freqs[low + 1], True), edge(freqs[high - 1], freqs[high], False)


@pytest.fixture(scope="module")
def ce_result(tmp_path_factory):
    path = tmp_path_factory.mktemp("ce") / "ce.sp"
    path.write_text(CE_NETLIST.format(**CE))
    return api.scan(str(path), probe="out")


def test_ce_low_band_short_circuit_time_constants_are_the_textbook_ones(ce_result):
    k = CE
    beta = k["gm"] * k["rpi"]
    # Sedra and Smith (CE amplifier, low-frequency response) / Gray et al. 7.3:
    r_c1 = k["rsig"] + par(k["rb"], k["rpi"])  # emitter bypassed: R_in = RB || r_pi
    r_ce = par(k["re"], (k["rpi"] + par(k["rb"], k["rsig"])) / (beta + 1))
    r_c2 = k["rc"] + k["rl"]
    low = {e.name: e for e in ce_result.band.low_band}
    assert set(low) == {"c1", "ce", "c2"}
    assert_allclose(low["c1"].ohms, r_c1, rtol=1e-6)
    assert_allclose(low["ce"].ohms, r_ce, rtol=1e-6)
    assert_allclose(low["c2"].ohms, r_c2, rtol=1e-6)
    est = sum(1 / (2 * math.pi * r * c) for r, c in ((r_c1, k["c1"]), (r_ce, k["ce"]), (r_c2, k["c2"])))
    assert_allclose(ce_result.band.f_low_estimate_hz, est, rtol=1e-6)
    assert ce_result.band.states == {"c1": "short", "ce": "short", "c2": "short"}
    assert ce_result.band.mode == "auto"


def test_ce_high_band_open_circuit_time_constants_and_mid_band_gains(ce_result):
    k = CE
    rs = par(k["rsig"], k["rb"], k["rpi"])  # what C_pi sees (Gray et al. 7.2.4)
    rl = par(k["rc"], k["rl"])
    r_mu = rs + rl + k["gm"] * rs * rl  # the Miller resistance of C_mu
    tau = k["cpi"] * rs + k["cmu"] * r_mu
    assert_allclose(ce_result.sum_tau_s, tau, rtol=1e-6)
    assert_allclose(ce_result.octc_hz, 1 / (2 * math.pi * tau), rtol=1e-6)
    cmu = ce_result.capacitor("cmu")
    assert_allclose(cmu.ohms, r_mu, rtol=1e-6)
    # the gain across C_mu is the bypassed one, -gm (RC || RL), not the degenerated one
    assert_allclose(cmu.gain, -k["gm"] * rl, rtol=1e-6)
    assert_allclose(cmu.signal_gain, -k["gm"] * rl, rtol=1e-6)
    assert cmu.klass == "miller"
    # mid-band gain, signed (Sedra and Smith): -(R_in / (R_in + R_sig)) gm (RC || RL)
    r_in = par(k["rb"], k["rpi"])
    assert_allclose(ce_result.dc_gain, -(r_in / (r_in + k["rsig"])) * k["gm"] * rl, rtol=1e-6)


def test_ce_both_corners_against_scipy_signal_on_the_sympy_transfer(ce_result):
    num, den = ce_transfer()
    peak, f_low, f_high = zpk_edges(num, den)
    assert_allclose(ce_result.band.f_low_hz, f_low, rtol=1e-4)
    assert_allclose(ce_result.band.f_high_hz, f_high, rtol=1e-4)
    assert_allclose(ce_result.f3db_hz, f_high, rtol=1e-4)
    # the mid-band gain is close to the peak of the exact transfer (bands well separated)
    assert_allclose(abs(ce_result.dc_gain), peak, rtol=2e-3)
    # the estimates point at the right corners (first order, within a few per cent here)
    assert abs(ce_result.band.f_low_estimate_hz / f_low - 1) < 0.05
    assert abs(ce_result.elmore_hz / f_high - 1) < 0.01


def test_ce_without_the_mid_band_is_the_dc_circuit_of_sections_1_to_5(write):
    """--band dc: coupling capacitors open, the bypass capacitor open: the reported gain
    across C_mu is the degenerated one, -gm RC' / (1 + gm RE (1 + 1/beta)) (Sedra and Smith)."""
    result = api.scan(write(CE_NETLIST.format(**CE)), probe="out",
                      settings=AnalysisSettings(band=BandRequest(mode="dc")))
    assert result.band.mode == "dc" and not result.band.states
    k = CE
    beta = k["gm"] * k["rpi"]
    gain = -k["gm"] * k["rc"] / (1 + k["gm"] * k["re"] * (1 + 1 / beta))
    assert_allclose(result.capacitor("cmu").gain, gain, rtol=1e-5)


# --------------------------------------------------------------------------------------
# Open-loop testbenches: the same amplifier three ways

def _amplifier(cc: float, rl: float):
    text = (SAMPLES / "two_stage_amp.sp").read_text()
    head, tail = text.split("Vinp inp 0 dc 1.6 ac 1\nVinn inn 0 dc 1.6\n")
    tail = tail.replace("Rl out 0 12k", f"Rl out 0 {rl!r}").replace("{cc}", repr(cc))
    return head, tail


def _testbenches(write, cc, rl):
    head, tail = _amplifier(cc, rl)
    drive = "Vinn inn 0 dc 1.6 ac 1\n"
    lc = write(head + drive + "Lfb out inp 1T\nCgnd inp 0 1T\n" + tail, "lc.sp")
    # an ideal buffer drives the large RC, so that the servo does not load the output
    servo = write(head + drive + "Eservo sv 0 out 0 1\nRservo sv inp 1k\nCservo inp 0 1e12\n" + tail, "servo.sp")
    v_out = api.bias(api.read(lc)).voltage("out")
    biased = write(head + drive + f"Vinp inp 0 dc {v_out!r}\n" + tail, "biased.sp")
    return lc, servo, biased


def _same_tables(results, rtol=1e-6):
    names = set.intersection(*({c.name for c in r.capacitors} for r in results))
    assert len(names) >= 20
    ref = results[-1]
    for q in ("gain", "ohms", "tau_s", "transfer_tau_s", "signal_gain"):
        scale = max(abs(getattr(c, q) or 0.0) for c in ref.capacitors if c.name in names)
        for name in names:
            want = getattr(ref.capacitor(name), q)
            for r in results[:-1]:
                got = getattr(r.capacitor(name), q)
                if want is None:
                    assert got is None, (name, q)
                    continue
                # relative, with a floor of 1e-6 of the largest of the column (T of an
                # exactly balanced node is round-off)
                assert abs(got - want) <= rtol * max(abs(want), 1e-3 * scale), (name, q, got, want)
    nodes = set.intersection(*({n.node for n in r.nodes} for r in results))
    assert {"out", "o1"} <= nodes
    for name in nodes:
        want = ref.node(name)
        for r in results[:-1]:
            got = r.node(name)
            for q in ("tau_s", "transfer_tau_s"):
                assert_allclose(getattr(got, q), getattr(want, q), rtol=rtol, atol=1e-3 * rtol * ref.sum_tau_s)
    for q in ("dc_gain", "elmore_hz", "octc_hz", "f3db_hz", "dominant_pole_hz"):
        for r in results[:-1]:
            assert_allclose(getattr(r, q), getattr(ref, q), rtol=rtol)


@settings(max_examples=examples(4), deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(cc=st.floats(0.5e-12, 4e-12), rl=st.floats(5e3, 50e3))
def test_open_loop_testbenches_give_the_same_tables(write, cc, rl):
    results = [api.scan(p, probe="out") for p in _testbenches(write, cc, rl)]
    lc, servo, biased = results
    assert lc.band.states == {"cgnd": "short", "lfb": "open"}
    assert servo.band.states == {"cservo": "short"}
    assert not biased.band.states
    # the compensation capacitor is Miller with the second stage's inverting gain
    assert lc.capacitor("cc").klass == "miller" and lc.capacitor("cc").gain < -1
    assert abs(lc.dc_gain) > 100
    _same_tables(results)


# --------------------------------------------------------------------------------------
# Identities on random networks (DC circuit, so that the test's own nodal system is the
# analysed one; the source drives node n1 through R_s)

RS = 1e3


def _driven(nodes, items):
    g, c = nodal(nodes, items)
    b = np.zeros(len(nodes))
    g[0, 0] += 1 / RS
    b[0] = 1 / RS
    return g, c, b


def _shorted(g, c, b, i, j):
    """The nodal system with node i shorted to node j (j None: to ground), exactly."""
    keep = [k for k in range(len(b)) if k != i]
    if j is None:
        return g[np.ix_(keep, keep)], b[keep], keep
    t = np.eye(len(b))[:, keep]  # v = T u: v_i follows v_j
    t[i, keep.index(j)] = 1.0
    return t.T @ g @ t, t.T @ b, keep


def _transfer_at(g, c, b, out, s):
    return np.linalg.solve(g + s * c, b)[out]


@settings(max_examples=examples(60), deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(networks(), st.data())
def test_transfer_time_constants_identities(write, case, data):
    nodes, items = case
    g, c, b = _driven(nodes, items)
    assume(np.linalg.cond(g) <= 1e10)
    out = data.draw(st.integers(0, len(nodes) - 1))
    h0 = float(np.linalg.solve(g, b)[out])
    assume(abs(h0) >= 1e-6)  # else the probe barely sees the source: T/H0 is round-off
    text = to_netlist(items).replace("random network\n", "random network\nvin src 0 dc 0 ac 1\nrs src n1 1000.0\n")
    # an island the source cannot reach: off the path by construction
    text += "rx x1 0 1k\ncx x1 0 1p\n"
    result = api.scan(write(text), probe=nodes[out], source="vin",
                      settings=AnalysisSettings(band=BandRequest(mode="dc")))
    assert_allclose(result.dc_gain, h0, rtol=1e-7)
    # -H'(0)/H(0) from the exact transfer at a small imaginary s (the complex-step
    # difference of Squire and Trapp 1998: H(jh) = H0 + jh H'(0) + O(h^2), no cancellation)
    tau_scale = max(abs(float(np.trace(np.linalg.solve(g, c)))), 1e-18)
    hstep = 1e-8 / tau_scale  # no cancellation, so a tiny step: the O(h^2) term vanishes
    deriv = _transfer_at(g, c, b, out, 1j * hstep).imag / hstep
    first_moment = -deriv / h0
    total = sum(cp.transfer_tau_s for cp in result.capacitors)
    # what is judged off the path (below 1e-9 of the largest v, w or T) may leave that much;
    # and the complex step itself carries round-off: Im H(jh) is known to about eps |H|, so the
    # first moment to about eps / h = 2.2e-16 * tau_scale / 1e-8 (a probe the capacitor does
    # not reach, whose exact first moment is 0, reads that much)
    roundoff = 4 * np.finfo(float).eps / hstep
    atol = 1e-6 * sum(abs(cp.transfer_tau_s) for cp in result.capacitors) + 1e-8 * tau_scale + roundoff
    assert_allclose(result.sum_transfer_tau_s, first_moment, rtol=1e-5, atol=atol)
    assert_allclose(total, result.sum_transfer_tau_s, rtol=1e-9, atol=atol)
    assert_allclose(sum(n.transfer_tau_s for n in result.nodes), total, rtol=1e-9, atol=atol)
    island = result.capacitor("cx")
    assert island.transfer_tau_s == 0.0 and not island.on_signal_path
    assert result.node("x1").transfer_tau_s == 0.0 and not result.node("x1").on_signal_path
    # T_k = tau_k (1 - H^k / H0), H^k: capacitor k shorted, the others open (Hajimiri 2010)
    index = {name: k for k, name in enumerate(nodes)}
    z = np.linalg.inv(g)
    for kind, na, nb, value, _, _ in items:
        if kind != "c":
            continue
        cap = next(cp for cp in result.capacitors
                   if {cp.node_in, cp.node_out} == {na, nb} and math.isclose(cp.farads, value, rel_tol=1e-12)
                   and cp.name.startswith("c"))
        i, j = index.get(na), index.get(nb)
        if i is None:
            i, j = j, None
        r_k = z[i, i] + (0 if j is None else z[j, j] - z[i, j] - z[j, i])
        tau_k = value * r_k
        gs, bs, keep = _shorted(g, c, b, i, j)
        if np.linalg.cond(gs) > 1e10:
            continue
        us = np.linalg.solve(gs, bs)
        if out == i:
            hk = 0.0 if j is None else us[keep.index(j)]
        else:
            hk = us[keep.index(out)]
        want = tau_k * (1 - hk / h0)
        assert_allclose(cap.transfer_tau_s, want, rtol=1e-5, atol=1e-7 * tau_scale + atol), cap.name
        if cap.transfer_tau_s == 0.0:
            assert not cap.on_signal_path


# --------------------------------------------------------------------------------------
# Off the path: a bias-line filter and an undriven stage

BIAS_FILTER = """common-source stage, current-source load biased through an RC filter
.model nch nmos level=1 (vto=0.5 kp=200u lambda=0.05 cgso=0.3n cgdo=0.3n tox=8n)
.model pch pmos level=1 (vto=-0.5 kp=80u lambda=0.05 cgso=0.3n cgdo=0.3n tox=8n)
Vdd vdd 0 1.8
Vin in 0 dc 0.7 ac 1
Rs in g 2k
M1 out g 0 0 nch w=10u l=0.5u
M2 out pb vdd vdd pch w=20u l=0.5u
Cl out 0 50f
{filter}
.end
"""

FILTER = "Vb pbias 0 1.0\nRf pbias pb 1Meg\nCf pb vdd 10p\n"


def test_bias_filter_is_off_the_path_and_changes_nothing(write):
    with_filter = api.scan(write(BIAS_FILTER.format(filter=FILTER), "f.sp"), probe="out")
    # the same netlist with the off-path part (the filter capacitor) deleted
    deleted = api.scan(write(BIAS_FILTER.format(filter=FILTER.replace("Cf pb vdd 10p\n", "")), "n.sp"), probe="out")
    cf = with_filter.capacitor("cf")
    assert not cf.on_signal_path and cf.transfer_tau_s == 0.0
    # its open-circuit share dominates the sum of time constants ...
    assert cf.share > 0.9
    # ... but the signal-path figures are those of the circuit without it
    assert_allclose(with_filter.elmore_hz, deleted.elmore_hz, rtol=1e-9)
    assert_allclose(with_filter.sum_transfer_tau_s, deleted.sum_transfer_tau_s, rtol=1e-9)
    for cap in deleted.capacitors:
        assert_allclose(with_filter.capacitor(cap.name).transfer_tau_s, cap.transfer_tau_s, rtol=1e-9, atol=1e-24)
    # the filter's own pole, 1 / (2 pi 1 Meg 10 p) = 15.9 kHz, is not the dominant pole of
    # the transfer (its residue is nil), and the -3 dB point lies far above it
    assert with_filter.dominant_pole_hz > 100 * 15.9e3
    assert with_filter.f3db_hz > 100 * 15.9e3
    ranked = [c.name for c in with_filter.capacitors]
    assert ranked.index("cf") > max(ranked.index(c.name) for c in with_filter.on_path_capacitors)


def test_undriven_stage_of_the_sample_is_off_the_path(tmp_path):
    text = (SAMPLES / "cascode_stage.sp").read_text()
    full = tmp_path / "full.sp"
    full.write_text(text)
    # delete the comparison stage (every element of M11's branch)
    lines = [ln for ln in text.splitlines()
             if not re.match(r"(?i)^(vref|rsrc2|m11|rl2|cload2)\b", ln)]
    alone = tmp_path / "alone.sp"
    alone.write_text("\n".join(lines) + "\n")
    a, b = api.scan(str(full)), api.scan(str(alone))
    assert a.probe == b.probe == "out"
    off = {c.name for c in a.off_path_capacitors}
    assert off == {"m11:cgd", "m11:cgs", "m11:cgb", "m11:cbd", "cload2"}
    assert a.capacitors[0].name != "m11:cgd"
    assert_allclose(a.elmore_hz, b.elmore_hz, rtol=1e-9)
    assert_allclose(a.f3db_hz, b.f3db_hz, rtol=1e-6)
    for cap in b.capacitors:
        assert_allclose(a.capacitor(cap.name).transfer_tau_s, cap.transfer_tau_s, rtol=1e-9)


def test_narrow_band_is_warned_and_its_edges_are_exact(write):
    """A high-pass corner (1 n, 1 k: 159 kHz) an octave below a low-pass one (10 k, 50 p:
    318 kHz): H(s) = -gm R2 s R1 C1 / ((1 + s R1 C1)(1 + s R2 C2)), evaluated with
    scipy.signal.freqs; the edges are well inside a decade of each other."""
    result = api.scan(write("narrow band\nVin in 0 dc 0 ac 1\nC1 in a 1n\nR1 a 0 1k\n"
                            "G1 out 0 a 0 -1m\nR2 out 0 10k\nC2 out 0 50p\n.end\n"), probe="out")
    t1, t2 = 1e3 * 1e-9, 10e3 * 50e-12
    num = [-1e-3 * 10e3 * t1, 0.0]
    den = np.polymul([t1, 1.0], [t2, 1.0])
    from scipy.optimize import brentq

    def mag(f):
        return abs(signal.freqs(num, den, worN=[2 * np.pi * f])[1][0])

    freqs = np.logspace(3, 8, 501)
    top = freqs[int(np.argmax([mag(f) for f in freqs]))]
    level = mag(top) / math.sqrt(2)
    f_low = brentq(lambda f: mag(f) - level, 1e3, top, xtol=1e-6)
    f_high = brentq(lambda f: mag(f) - level, top, 1e8, xtol=1e-6)
    # the peak of the test's grid is within 0.5 % of the true one: the level within 1e-5
    assert_allclose(result.band.f_low_hz, f_low, rtol=1e-4)
    assert_allclose(result.band.f_high_hz, f_high, rtol=1e-4)
    assert result.band.states == {"c1": "short"}
    assert any("not separated" in w for w in result.band.warnings)
    assert any("not separated" in w for w in result.warnings)


def test_a_negative_capacitance_gets_the_corner_of_its_magnitude():
    # a negative part of a charge-based device's split matrix (-2 fF seeing 10 kOhm) has its corner
    # at 1/(2 pi R |C|) = 7.96 GHz: open at any lower f_mid, never shorted because its sign
    # makes 1/(2 pi R C) negative
    from tauscan.analysis.band import Reactive, corner_hz

    part = Reactive("m1:cds", "c", -2e-15, "d", "s", "t.sp", 1)
    assert corner_hz(part, 10e3) == pytest.approx(1 / (2 * math.pi * 10e3 * 2e-15), rel=1e-12)
