"""Identities of METHOD section 4-5 as property tests (hypothesis) on random connected
networks of R, C and G (VCCS) / E (VCVS) sources:

    sum_tau = trace(G^-1 C) = -sum(1/p)       (the s coefficient b1 of det(G+sC)/det(G))
    node time constants add up to the capacitor total
    dominant-pole shares add up to 1

G and C for the trace and the poles are built in the test, independently of tauscan's
stamping, as a plain nodal (R, C, VCCS) system; circuits with E sources are checked
against tauscan's own MNA matrices.
"""

import numpy as np
import scipy.linalg as la
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose

from tauscan import api
from tauscan.linear import linearize

from tests.conftest import examples

GMIN = 1e-12


@st.composite
def networks(draw, with_vcvs=False):
    n = draw(st.integers(2, 7))
    nodes = [f"n{k}" for k in range(1, n + 1)]
    items = []  # (kind, a, b, value, c, d)
    # a resistor tree keeps every node connected to ground
    for k, node in enumerate(nodes):
        other = "0" if k == 0 else draw(st.sampled_from(["0"] + nodes[:k]))
        items.append(("r", node, other, draw(st.floats(100, 1e5)), None, None))
    pool = ["0"] + nodes
    for _ in range(draw(st.integers(0, 4))):
        a, b = draw(st.sampled_from(pool)), draw(st.sampled_from(pool))
        if a != b:
            items.append(("r", a, b, draw(st.floats(100, 1e5)), None, None))
    for _ in range(draw(st.integers(1, 6))):
        a, b = draw(st.sampled_from(pool)), draw(st.sampled_from(pool))
        if a != b:
            items.append(("c", a, b, draw(st.floats(1e-15, 1e-11)), None, None))
    for _ in range(draw(st.integers(0, 3))):
        p, q, c, d = (draw(st.sampled_from(pool)) for _ in range(4))
        if p != q and c != d:
            items.append(("g", p, q, draw(st.floats(-5e-3, 5e-3)), c, d))
    if with_vcvs:
        for k in range(draw(st.integers(1, 2))):
            c, d = draw(st.sampled_from(pool)), draw(st.sampled_from(pool))
            out = draw(st.sampled_from(nodes))
            if c != d:
                items.append(("e", f"e{k}", "0", draw(st.floats(-50, 50)), c, d))
                items.append(("r", f"e{k}", out, draw(st.floats(100, 1e4)), None, None))
    return nodes, items


def to_netlist(items):
    lines = ["random network"]
    counts = {}
    for kind, a, b, value, c, d in items:
        counts[kind] = counts.get(kind, 0) + 1
        name = f"{kind}{counts[kind]}"
        if kind in "rc":
            lines.append(f"{name} {a} {b} {value!r}")
        else:
            lines.append(f"{name} {a} {b} {c} {d} {value!r}")
    return "\n".join(lines) + "\n"


def nodal(nodes, items):
    """Independent nodal G and C: KCL rows, GMIN on every node."""
    index = {name: k for k, name in enumerate(nodes)}
    n = len(nodes)
    g = np.eye(n) * GMIN
    c = np.zeros((n, n))

    def put(m, a, b, value):
        for x, y, sgn in ((a, a, 1), (b, b, 1), (a, b, -1), (b, a, -1)):
            if x in index and y in index:
                m[index[x], index[y]] += sgn * value

    for kind, a, b, value, cp, cn in items:
        if kind == "r":
            put(g, a, b, 1 / value)
        elif kind == "c":
            put(c, a, b, value)
        elif kind == "g":  # current value*(v_cp - v_cn) leaves a, enters b
            for row, sr in ((a, 1), (b, -1)):
                for col, sc in ((cp, 1), (cn, -1)):
                    if row in index and col in index:
                        g[index[row], index[col]] += sr * sc * value
    return g, c


def _tolerant(result, trace):
    return max(1e-9 * abs(trace), 1e-9 * sum(abs(c.tau_s) for c in result.capacitors), 1e-24)


@settings(max_examples=examples(80), deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(networks())
def test_sum_tau_is_the_trace_and_minus_sum_of_inverse_poles(write, case):
    nodes, items = case
    g, c = nodal(nodes, items)
    if abs(np.linalg.det(g)) < 1e-300 or np.linalg.cond(g) > 1e12:
        return  # a (nearly) singular random network has no meaningful Z
    path = write(to_netlist(items))
    result = api.scan(path)
    trace = float(np.trace(np.linalg.solve(g, c)))
    assert_allclose(result.sum_tau_s, trace, rtol=1e-7, atol=_tolerant(result, trace))
    lam = la.eigvals(c, g)
    lam = lam[np.isfinite(lam) & (np.abs(lam) > 1e-13 * np.max(np.abs(lam)))]
    assert_allclose(result.sum_tau_s, float(np.real(np.sum(lam))), rtol=1e-6, atol=_tolerant(result, trace))
    # -sum(1/p) over tauscan's own poles
    minus_sum = float(np.real(-np.sum(1 / np.array(result.poles)))) if result.poles else 0.0
    assert_allclose(minus_sum, result.sum_tau_s, rtol=1e-6, atol=_tolerant(result, trace))
    # node time constants add up to the capacitor total
    assert_allclose(sum(n.tau_s for n in result.nodes), sum(cp.tau_s for cp in result.capacitors), rtol=1e-9, atol=1e-24)


@settings(max_examples=examples(60), deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(networks(with_vcvs=True))
def test_identities_with_vcvs_on_tauscan_matrices(write, case):
    nodes, items = case
    path = write(to_netlist(items))
    circuit = api.read(path)
    op = api.bias(circuit)
    ss = linearize(op)
    g, c = ss.g.toarray(), ss.c.toarray()
    if np.linalg.cond(g) > 1e12:
        return
    result = api.scan(path)
    trace = float(np.trace(np.linalg.solve(g, c)))
    assert_allclose(result.sum_tau_s, trace, rtol=1e-7, atol=_tolerant(result, trace))
    if result.poles and result.poles_complete:
        assert_allclose(float(np.real(-np.sum(1 / np.array(result.poles)))), result.sum_tau_s, rtol=1e-6, atol=_tolerant(result, trace))


@settings(max_examples=examples(60), deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(networks())
def test_dominant_pole_shares_add_up_to_one(write, case):
    nodes, items = case
    g, _ = nodal(nodes, items)
    if np.linalg.cond(g) > 1e12:
        return
    result = api.scan(write(to_netlist(items)))
    shares = [c.pole_share for c in result.capacitors]
    if not result.poles or any(s is None for s in shares):
        return
    assert_allclose(sum(shares), 1.0, rtol=1e-6)
