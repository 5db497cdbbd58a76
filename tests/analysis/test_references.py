"""Transfer functions and poles against scipy.signal (a state-space model built in the
test from the circuit equations), a two-node network's b1 against a sympy symbolic
derivation, and the pole sensitivity against a finite difference."""

import math
import warnings

import numpy as np
import scipy.signal as signal
import sympy
from numpy.testing import assert_allclose

from tauscan import api
from tauscan.analysis import AnalysisSettings


def ladder(n, r=1e3, c=1e-12):
    lines = ["rc ladder", "Vin in 0 dc 0 ac 1", f"R1 in n1 {r}"]
    for k in range(1, n + 1):
        lines.append(f"C{k} n{k} 0 {c}")
        if k < n:
            lines.append(f"R{k + 1} n{k} n{k + 1} {r}")
    return "\n".join(lines) + "\n"


def ladder_state_space(n, r=1e3, c=1e-12):
    """dv/dt = A v + B u for the node voltages of the ladder (capacitor voltages as states)."""
    g = np.zeros((n, n))
    g[0, 0] += 1 / r  # R1 from the (AC-grounded) source to the first node
    for k in range(n - 1):  # R between node k and node k+1
        g[k, k] += 1 / r
        g[k + 1, k + 1] += 1 / r
        g[k, k + 1] -= 1 / r
        g[k + 1, k] -= 1 / r
    g[np.arange(n), np.arange(n)] += 1e-12  # GMIN, as METHOD puts it on every node
    a = -g / c
    b = np.zeros((n, 1))
    b[0, 0] = 1 / (r * c)
    cmat = np.zeros((1, n))
    cmat[0, -1] = 1
    return signal.StateSpace(a, b, cmat, np.zeros((1, 1)))


#: The state-space models are written with time in nanoseconds, so that scipy.signal's
#: polynomial forms stay well conditioned; frequencies are scaled back below.
T_UNIT = 1e-9


def scaled(sys):
    return signal.StateSpace(sys.A * T_UNIT, sys.B * T_UNIT, sys.C, sys.D)


def poles_of(sys):
    """Poles in rad/s, from scipy.signal's zero-pole-gain form of the scaled model."""
    s = scaled(sys)
    with warnings.catch_warnings():
        # the numerator of an all-pole response has exact leading zeros, which scipy
        # trims with a BadCoefficients warning; the poles are unaffected
        warnings.simplefilter("ignore", signal.BadCoefficients)
        return np.asarray(signal.ss2zpk(s.A, s.B, s.C, s.D)[1]) / T_UNIT


def response(sys, w):
    """|H(jw)| by scipy.signal.freqresp of the scaled model (w in rad/s)."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", signal.BadCoefficients)  # see poles_of
        return signal.freqresp(scaled(sys), w=[w * T_UNIT + 1e-30])[1][0]


def minus3db(sys, f_lo=1e3, f_hi=1e12):
    """-3 dB point of a low-pass state-space model, by bisection on |H|."""
    h0 = abs(response(sys, 0.0))
    lo, hi = math.log(f_lo), math.log(f_hi)
    for _ in range(200):
        mid = 0.5 * (lo + hi)
        h = abs(response(sys, 2 * math.pi * math.exp(mid)))
        lo, hi = (mid, hi) if h > h0 / math.sqrt(2) else (lo, mid)
    return math.exp(lo)


def test_rc_ladder_poles_and_bandwidth_against_scipy_signal(write):
    n = 6
    result = api.scan(write(ladder(n)), probe=f"n{n}")
    sys = ladder_state_space(n)
    poles = np.sort(np.abs(poles_of(sys)))
    assert_allclose(np.sort(np.abs(result.poles)), poles, rtol=1e-9)
    assert_allclose(result.f3db_hz, minus3db(sys), rtol=1e-7)
    # ladder with equal R and C: sum of open-circuit time constants = RC n(n+1)/2 (Thornton et al.)
    assert_allclose(result.sum_tau_s, 1e3 * 1e-12 * n * (n + 1) / 2, rtol=1e-6)


TWO_STAGE = """two-stage amplifier small-signal model with Miller compensation
Vin src 0 dc 0 ac 1
Rs src a 1k
G1 b 0 a 0 1m
R1 b 0 100k
C1 b 0 200f
Cc b o 1p
G2 o 0 b 0 5m
R2 o 0 20k
C2 o 0 2p
Ca a 0 50f
"""


def two_stage_state_space():
    # nodes a, b, o; C dv/dt = -G v + bu ; G with GMIN, g_m stamps as in KCL (current leaving node)
    gm1, gm2 = 1e-3, 5e-3
    g = np.array([
        [1 / 1e3, 0, 0],
        [gm1, 1 / 100e3, 0],
        [0, gm2, 1 / 20e3],
    ]) + np.eye(3) * 1e-12
    cc = 1e-12
    c = np.array([
        [50e-15, 0, 0],
        [0, 200e-15 + cc, -cc],
        [0, -cc, 2e-12 + cc],
    ])
    a = -np.linalg.solve(c, g)
    b = np.linalg.solve(c, np.array([[1 / 1e3], [0], [0]]))
    return signal.StateSpace(a, b, np.array([[0, 0, 1.0]]), np.zeros((1, 1)))


def test_two_stage_amplifier_against_scipy_signal(write):
    result = api.scan(write(TWO_STAGE), probe="o")
    sys = two_stage_state_space()
    p = poles_of(sys)
    assert_allclose(np.sort(np.abs(result.poles)), np.sort(np.abs(p)), rtol=1e-8)
    assert_allclose(result.f3db_hz, minus3db(sys, 1.0, 1e10), rtol=1e-6)
    dc = abs(response(sys, 0.0))
    assert_allclose(result.dc_gain, dc, rtol=1e-9)
    # the compensation capacitor carries the Miller multiplication of the second stage
    cc = result.capacitor("cc")
    assert cc.klass == "miller" and cc.node_in == "b"
    assert_allclose(cc.gain, -5e-3 * 20e3, rtol=1e-6)


def test_two_node_b1_against_sympy(write):
    rs, c1, c2, c3, gm, r2 = sympy.symbols("R_s C_1 C_2 C_3 g_m R_2", positive=True)
    s = sympy.symbols("s")
    # nodes 1 and 2: Rs from the (AC-grounded) source to node 1, C1 node 1-ground,
    # C2 bridging 1-2, g_m v1 leaving node 2, R2 and C3 node 2-ground
    y = sympy.Matrix([
        [1 / rs + s * (c1 + c2), -s * c2],
        [gm - s * c2, 1 / r2 + s * (c2 + c3)],
    ])
    ratio = sympy.expand(sympy.simplify(y.det() / y.subs(s, 0).det()))
    b1 = sympy.simplify(ratio.coeff(s, 1))
    values = {rs: 5e3, c1: 30e-15, c2: 8e-15, c3: 40e-15, gm: 3e-3, r2: 20e3}
    expected = float(b1.subs(values))
    text = ("two nodes\nVin src 0 dc 0 ac 1\nRs src n1 5k\nC1 n1 0 30f\nC2 n1 n2 8f\nG1 n2 0 n1 0 3m\n"
            "R2 n2 0 20k\nC3 n2 0 40f\n")
    result = api.scan(write(text))
    assert_allclose(result.sum_tau_s, expected, rtol=1e-7)  # GMIN is the only difference
    # and the textbook closed form it reduces to: Rs(C1 + C2(1 + gm R2)) + R2(C2 + C3)
    assert_allclose(expected, 5e3 * (30e-15 + 8e-15 * (1 + 3e-3 * 20e3)) + 20e3 * (8e-15 + 40e-15), rtol=1e-12)


def test_pole_sensitivity_against_a_finite_difference(write):
    base = api.scan(write(TWO_STAGE, "a.sp"))
    p0 = base.poles[0]
    for name, value in (("cc", 1e-12), ("c2", 2e-12), ("c1", 200e-15)):
        lines = []
        for line in TWO_STAGE.splitlines():
            if line.lower().startswith(name + " "):
                parts = line.split()
                parts[-1] = repr(value * (1 + 1e-6))
                line = " ".join(parts)
            lines.append(line)
        p1 = api.scan(write("\n".join(lines) + "\n", f"{name}.sp")).poles[0]
        s_fd = (p1 - p0) / p0 / 1e-6  # (C/p) dp/dC by a forward difference
        # share = -S_k (Rommes and Martins 2006)
        assert_allclose(-base.capacitor(name).pole_share, s_fd.real, rtol=1e-4, atol=1e-7)


def test_sparse_poles_agree_with_dense(write):
    path = write(ladder(40))
    dense = api.scan(path, probe="n40")
    sparse = api.scan(path, probe="n40", settings=AnalysisSettings(dense_limit=10))
    assert not sparse.poles_complete and sparse.poles
    k = len(sparse.poles)
    assert_allclose(np.abs(sparse.poles), np.abs(dense.poles[:k]), rtol=1e-8)
    assert_allclose(sparse.f3db_hz, dense.f3db_hz, rtol=1e-7)
    for c in dense.capacitors[:5]:
        assert_allclose(sparse.capacitor(c.name).pole_share, c.pole_share, rtol=1e-5, atol=1e-9)


def test_dataframes(write):
    result = api.scan(write(TWO_STAGE))
    caps = result.capacitors_frame()
    nodes = result.nodes_frame()
    assert list(caps["name"]) == [c.name for c in result.capacitors]
    assert {"class", "gain", "tau_s", "share", "pole_share"} <= set(caps.columns)
    assert {"node", "tau_s", "miller_share", "miller_dominated"} <= set(nodes.columns)
    assert caps["tau_s"].is_monotonic_decreasing


def test_stepping_search_on_an_ac_coupled_probe(write, monkeypatch):
    """A band-pass (1 uF into 1 k, a 1 mS transconductance into 1 k || 1 nF): with the large-
    circuit search forced, the upper -3 dB point is taken from the mid-band, not from the
    (GMIN-only) DC gain.  Reference: the closed form
    |H| = |s R1 C1 / (1 + s R1 C1)| gm R2 / |1 + s R2 C2|, solved with scipy.optimize.brentq."""
    from scipy.optimize import brentq

    from tauscan.analysis import response as response_mod

    # a 1e15-ohm leak across C1 leaves a DC gain of 1e-12: too small to be the reference
    text = ("band-pass\nVin in 0 dc 0 ac 1\nC1 in a 1u\nRleak in a 1e15\nR1 a 0 1k\nG1 0 b a 0 1m\nR2 b 0 1k\n"
            "C2 b 0 1n\n")
    monkeypatch.setattr(response_mod, "DENSE_LIMIT", 0)
    result = api.scan(write(text), probe="b", settings=AnalysisSettings(dense_limit=0))

    def mag(f):
        s = 2j * math.pi * f
        return abs(s * 1e-3 / (1 + s * 1e-3) * 1e-3 * 1e3 / (1 + s * 1e-6))

    peak = max(mag(f) for f in np.geomspace(1e2, 1e6, 4001))
    exact = brentq(lambda f: mag(f) - peak / math.sqrt(2), 1e4, 1e7)
    # the pass band's upper edge, on the circuit as read (C1 is a short in the mid-band circuit)
    assert "pass band" in result.f3db_note
    assert result.band.states == {"c1": "short"}
    # the 4x grid samples the plateau a little below its top (both corners are three
    # decades from the samples' best point), which moves the crossings by about twice that
    assert_allclose(result.f3db_hz, exact, rtol=5e-3)
    low = brentq(lambda f: mag(f) - peak / math.sqrt(2), 1e-1, 1e4)
    assert_allclose(result.band.f_low_hz, low, rtol=5e-3)


def test_sparse_poles_do_not_depend_on_earlier_runs(write):
    """ARPACK starts from a fixed vector: the same circuit gives the same poles, bit for bit,
    whatever ran before in the process (a batch worker runs many)."""
    path = write(ladder(60), "a.sp")
    other = write(ladder(45, r=2e3), "b.sp")
    settings = AnalysisSettings(dense_limit=10)
    first = api.scan(path, probe="n60", settings=settings)
    api.scan(other, probe="n45", settings=settings)
    again = api.scan(path, probe="n60", settings=settings)
    assert list(first.poles) == list(again.poles)
    assert [c.pole_share for c in first.capacitors] == [c.pole_share for c in again.capacitors]


def count_factorizations(monkeypatch) -> list:
    """The s of every complex factorization made from now on (the list fills as they run)."""
    from tauscan.analysis import systems

    calls = []
    real = systems.ComplexSolver.factor

    def counted(self, s):
        calls.append(s)
        return real(self, s)

    monkeypatch.setattr(systems.ComplexSolver, "factor", counted)
    return calls


def test_stepping_search_on_a_response_that_levels_off(write, monkeypatch):
    """A high-pass (1 pF into 1 MOhm): |H| -> 1 above 159 kHz and never falls (closed form
    s RC / (1 + s RC)), so there is no upper -3 dB point.  The large-circuit search must say
    so, striding across the flat band rather than stepping 8x at a time to 1e18 Hz.  (A flat
    stretch alone never ends the search: a DC-coupled probe can stay flat for nine decades and
    still roll off.)"""
    from tauscan.analysis import response as response_mod

    monkeypatch.setattr(response_mod, "DENSE_LIMIT", 0)
    calls = count_factorizations(monkeypatch)
    text = "high-pass\nVin in 0 dc 0 ac 1\nC1 in out 1p\nR1 out 0 1meg\nRleak in out 1e15\n"
    result = api.scan(write(text), probe="out", settings=AnalysisSettings(dense_limit=0))
    assert result.f3db_hz is None and "no -3 dB point" in result.f3db_note
    assert len(calls) < 25  # 8x steps alone would take about 40


def test_large_circuit_search_uses_the_slope_and_meets_scipy_signal(write, monkeypatch):
    """With the large-circuit search forced (every point a sparse factorization), the -3 dB
    point of a six-section RC ladder matches scipy.signal's state-space model to 1e-6, the
    slope each point gives (one more solve, dH/ds = -e^T (G + sC)^-1 C x) matches a central
    difference of scipy.signal's |H|, and the search takes fewer factorizations than the
    slope-free regula falsi it replaced (counted on the same circuit)."""
    from tauscan.analysis import response as response_mod

    n = 6
    sys = ladder_state_space(n)
    monkeypatch.setattr(response_mod, "DENSE_LIMIT", 0)
    calls = count_factorizations(monkeypatch)
    seen = {}
    real_call = response_mod.Response.__call__

    def kept(self, f):
        value = real_call(self, f)
        seen["resp"] = self
        return value

    monkeypatch.setattr(response_mod.Response, "__call__", kept)
    path = write(ladder(n))
    result = api.scan(path, probe=f"n{n}", settings=AnalysisSettings(dense_limit=0))
    assert "stepping" in result.f3db_note
    assert_allclose(result.f3db_hz, minus3db(sys), rtol=1e-6)
    with_slope = len(calls)
    slopes = seen["resp"].slopes
    assert len(slopes) >= 3
    for f, slope in slopes.items():
        w = 2 * math.pi * f
        d = 1e-5
        hi, lo = abs(response(sys, w * math.exp(d))), abs(response(sys, w * math.exp(-d)))
        assert_allclose(slope, (math.log(hi) - math.log(lo)) / (2 * d), rtol=1e-5, atol=1e-9)
    # the same search with the slope-free refinement
    calls.clear()
    monkeypatch.setattr(response_mod, "_refine_sloped", lambda resp, t, fa, fb, va, vb: response_mod._refine(resp, t, fa, fb, va, vb))
    plain = api.scan(path, probe=f"n{n}", settings=AnalysisSettings(dense_limit=0))
    assert_allclose(plain.f3db_hz, minus3db(sys), rtol=1e-3)
    assert with_slope < len(calls)


def test_sparse_dominant_pole_is_the_transfers(write):
    # a slow pole the transfer barely sees (a bias node filtered through 1 Gohm and 1 nF, 0.16 Hz)
    # beside a 40-section ladder: the sparse path's smallest pole is the slow one, and the
    # dominant pole algorithm must find the ladder's, as the dense path does by residues
    # (METHOD section 7; Rommes and Martins 2006).  Reference: the dense generalized eigen-solver.
    text = ladder(40) + "Rf n20 bf 1g\nCf bf 0 1n\n"
    path = write(text)
    dense = api.scan(path, probe="n40")
    sparse = api.scan(path, probe="n40", settings=AnalysisSettings(dense_limit=10))
    assert abs(sparse.poles[0]) / (2 * math.pi) < 1.0  # the slow pole comes first by magnitude
    assert "residue" in dense.methods["dominant pole"] and "residue" in sparse.methods["dominant pole"]
    assert_allclose(sparse.dominant_pole_hz, dense.dominant_pole_hz, rtol=1e-6)
    assert sparse.dominant_pole_hz > 1e4  # the ladder's (about 240 kHz), not the filter's
    for c in dense.capacitors[:5]:
        assert_allclose(sparse.capacitor(c.name).pole_share, c.pole_share, rtol=1e-4, atol=1e-8)
