"""The DC solver against independent solutions: hand-written KCL equations solved
with scipy.optimize.root for a five-transistor differential amplifier and a current
mirror (agreement within 1 uV), KCL at every node of random circuits, and the
fallbacks and failures."""

import math

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose
from scipy.optimize import root

from tauscan.errors import CircuitError, ConvergenceError
from tauscan.op import solve_dc
from tauscan.op.solver import DCSolver
from tauscan.reader import read_netlist

from tests.conftest import examples

GMIN = 1e-12  # METHOD: every node has GMIN to ground; the reference equations include it


def sh_current(vgs, vds, vbs, vto, kp, w, l, lam, gamma=0.0, phi=0.6):
    """Shichman-Hodges drain current, normalized NMOS frame, written independently here."""
    if vds < 0:
        return -sh_current(vgs - vds, -vds, vbs - vds, vto, kp, w, l, lam, gamma, phi)
    vt = vto + gamma * (math.sqrt(max(phi - vbs, 0.0)) - math.sqrt(phi))
    vov = vgs - vt
    beta = kp * w / l
    if vov <= 0:
        return 0.0
    if vds >= vov:
        return 0.5 * beta * vov**2 * (1 + lam * vds)
    return beta * vds * (vov - vds / 2) * (1 + lam * vds)


DIFF_AMP = """five-transistor differential amplifier
Vdd vdd 0 1.8
Vp inp 0 0.9
Vn inn 0 0.9
Vb vb 0 0.65
M1 x inp tail 0 nch w=4u l=1u
M2 out inn tail 0 nch w=4u l=1u
M3 x x vdd vdd pch w=8u l=1u
M4 out x vdd vdd pch w=8u l=1u
M5 tail vb 0 0 nch w=8u l=2u
.model nch nmos (vto=0.45 kp=200u lambda=0.05 gamma=0.4 phi=0.8 is=1e-30)
.model pch pmos (vto=-0.5 kp=80u lambda=0.08 gamma=0.3 phi=0.8 is=1e-30)
"""


def test_differential_amplifier_against_scipy_root(write):
    op = solve_dc(read_netlist(write(DIFF_AMP)))
    n = dict(vto=0.45, kp=200e-6, lam=0.05, gamma=0.4, phi=0.8)
    p = dict(vto=0.5, kp=80e-6, lam=0.08, gamma=0.3, phi=0.8)

    def kcl(v):
        tail, x, out = v
        i1 = sh_current(0.9 - tail, x - tail, -tail, w=4e-6, l=1e-6, **n)
        i2 = sh_current(0.9 - tail, out - tail, -tail, w=4e-6, l=1e-6, **n)
        i5 = sh_current(0.65, tail, 0.0, w=8e-6, l=2e-6, **n)
        i3 = sh_current(1.8 - x, 1.8 - x, 0.0, w=8e-6, l=1e-6, **p)  # PMOS, normalized frame
        i4 = sh_current(1.8 - x, 1.8 - out, 0.0, w=8e-6, l=1e-6, **p)
        # in microamps, so that the root finder's tolerances fit the problem's scale
        return np.array([i1 + i2 - i5 - GMIN * tail, i3 - i1 - GMIN * x, i4 - i2 - GMIN * out]) * 1e6

    ref = root(kcl, [0.3, 1.0, 1.0], method="hybr", options={"xtol": 1e-13})
    assert ref.success
    got = [op.voltage(k) for k in ("tail", "x", "out")]
    assert_allclose(got, ref.x, atol=1e-6)
    assert all(op.device(m).region == "saturation" for m in ("m1", "m2", "m3", "m4", "m5"))


def test_current_mirror_against_scipy_root(write):
    c = read_netlist(write("mirror\nVdd vdd 0 3\nRref vdd g 20k\nM1 g g 0 0 nch w=10u l=1u\nM2 out g 0 0 nch w=20u l=1u\n"
                           "Rl vdd out 10k\n.model nch nmos (vto=0.6 kp=120u lambda=0.04 is=1e-30)\n"))
    op = solve_dc(c)
    m = dict(vto=0.6, kp=120e-6, lam=0.04)

    def kcl(v):
        g, out = v
        return np.array([(3 - g) / 20e3 - sh_current(g, g, 0, w=10e-6, l=1e-6, **m) - GMIN * g,
                         (3 - out) / 10e3 - sh_current(g, out, 0, w=20e-6, l=1e-6, **m) - GMIN * out]) * 1e6

    ref = root(kcl, [1.0, 1.5], options={"xtol": 1e-13})
    assert ref.success
    assert_allclose([op.voltage("g"), op.voltage("out")], ref.x, atol=1e-6)


def test_deterministic_to_the_last_digit(write):
    path = write(DIFF_AMP)
    a = solve_dc(read_netlist(path)).x
    b = solve_dc(read_netlist(path)).x
    assert np.array_equal(a, b)


def kcl_residual(op):
    """Sum of currents leaving each node, computed from the elements at the solution."""
    solver = DCSolver(op.circuit, op.temp_c)
    x = np.zeros(solver.size)
    x[: op.network.size] = op.x
    jdev, ieq, iabs, _, _ = solver._devices(x, [None] * len(solver.groups), limit=False)
    xr = x[1:]
    r = solver.lin @ xr + jdev @ xr + ieq[1:] + GMIN * np.concatenate([xr[: solver.n_node_rows], np.zeros(len(xr) - solver.n_node_rows)]) - solver.b[1:]
    scale = solver.lin_abs @ np.abs(xr) + iabs[1:] + np.abs(solver.b[1:])
    return r[: solver.n_node_rows], scale[: solver.n_node_rows]


@st.composite
def random_circuits(draw):
    n = draw(st.integers(2, 6))
    nodes = [f"n{k}" for k in range(n)]
    lines = ["random circuit", "Vdd vdd 0 2.5", ".model dm d (is=1e-14)", ".model qn npn (is=1e-16 bf=80 vaf=40)",
             ".model mn nmos (vto=0.5 kp=100u lambda=0.05)", ".model mp pmos (vto=-0.5 kp=40u lambda=0.05)"]
    # a resistor from every node to vdd or ground keeps a DC path everywhere
    for k, node in enumerate(nodes):
        ohms = draw(st.sampled_from(["1k", "4.7k", "10k", "47k", "100k"]))
        lines.append(f"Rb{k} {node} {draw(st.sampled_from(['vdd', '0']))} {ohms}")
    # devices sit between internal nodes and ground, never straight across the supply
    # (a junction forward-biased by 2.5 V has no meaningful operating point)
    pool = nodes + ["0"]
    for k in range(draw(st.integers(0, 6))):
        a, b = draw(st.sampled_from(pool)), draw(st.sampled_from(pool))
        if a != b:
            lines.append(f"R{k} {a} {b} {draw(st.sampled_from(['500', '2k', '20k']))}")
    for k in range(draw(st.integers(0, 3))):
        a, b = draw(st.sampled_from(pool)), draw(st.sampled_from(pool))
        if a != b:
            lines.append(f"D{k} {a} {b} dm")
    for k in range(draw(st.integers(0, 3))):
        c, b, e = (draw(st.sampled_from(pool)) for _ in range(3))
        lines.append(f"Q{k} {c} {b} {e} qn")
    for k in range(draw(st.integers(0, 3))):
        d, g, s = (draw(st.sampled_from(pool)) for _ in range(3))
        kind = draw(st.sampled_from(["mn", "mp"]))
        bulk = "0" if kind == "mn" else "vdd"
        lines.append(f"M{k} {d} {g} {s} {bulk} {kind} w=2u l=1u")
    return "\n".join(lines) + "\n"


@settings(max_examples=examples(60), deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(random_circuits())
def test_kcl_holds_at_every_node(write, text):
    op = solve_dc(read_netlist(write(text)))
    residual, scale = kcl_residual(op)
    assert np.all(np.abs(residual) <= 1e-6 * scale + 1e-12), text


def test_hard_circuit_uses_a_fallback_and_still_satisfies_kcl(write):
    # a stack of diode-connected bipolars and a regenerative latch: plain Newton from zero
    # may need help; whatever strategy is used, KCL must hold at the end
    text = ("latch\nVcc vcc 0 5\nR1 vcc a 1k\nR2 vcc b 1k\nQ1 a b e qn\nQ2 b a e qn\nRe e 0 100\n"
            "D1 vcc d1 dm\nD2 d1 d2 dm\nD3 d2 d3 dm\nR3 d3 0 100\n.model qn npn (is=1e-15 bf=100)\n.model dm d (is=1e-15)\n")
    op = solve_dc(read_netlist(write(text)))
    residual, scale = kcl_residual(op)
    assert np.all(np.abs(residual) <= 1e-6 * scale + 1e-12)


def test_floating_node_is_warned_and_held_by_gmin(write):
    op = solve_dc(read_netlist(write("t\nV1 a 0 1\nR1 a b 1k\nC1 b f 1p\nM1 b f 0 0 mn\n.model mn nmos (vto=0.5 kp=1m)\n")))
    assert op.floating == ["f"]
    assert any("node f has no DC path" in w for w in op.warnings)


def test_voltage_source_loop_is_an_error(write):
    with pytest.raises(CircuitError, match="loop of voltage sources"):
        solve_dc(read_netlist(write("t\nV1 a 0 1\nV2 a 0 2\nR1 a 0 1k\n")))


def test_current_sources_in_series_is_an_error(write):
    with pytest.raises(CircuitError, match="no DC path"):
        solve_dc(read_netlist(write("t\nI1 0 a 1m\nI2 a b 1m\nR1 b 0 1k\n")))


def test_non_convergence_names_nodes_devices_and_last_step(write, monkeypatch):
    from tauscan.op import solver as solver_module

    c = read_netlist(write(DIFF_AMP))
    monkeypatch.setattr(solver_module.SolverSettings, "__init__", solver_module.SolverSettings.__init__)
    s = solver_module.SolverSettings(itl1=1)
    with pytest.raises(ConvergenceError) as info:
        solve_dc(c, settings=s)
    message = info.value.message
    assert "did not converge" in message and "last step tried: source stepping" in message
    assert "nodes that would not settle" in message and "m" in message


def test_controlled_sources_at_dc(write):
    c = read_netlist(write("ctl\nV1 a 0 1\nR1 a 0 1k\nE1 b 0 a 0 3\nR2 b 0 1k\nG1 0 c a 0 2m\nR3 c 0 1k\n"
                           "Vs d 0 0\nR4 b d 500\nF1 0 e vs 2\nR5 e 0 100\nH1 f 0 vs 1k\nR6 f 0 1meg\nL1 b g 1u\nR7 g 0 3k\n"))
    op = solve_dc(c)
    assert_allclose(op.voltage("b"), 3.0, rtol=1e-9)
    assert_allclose(op.voltage("c"), 2.0, rtol=1e-9)  # 2 mA into c through 1k
    i_vs = 3.0 / 500  # current through Vs from d to 0
    assert_allclose(op.voltage("e"), 2 * i_vs * 100, rtol=1e-9)
    assert_allclose(op.voltage("f"), 1e3 * i_vs, rtol=1e-9)
    assert_allclose(op.voltage("g"), 3.0, rtol=1e-9)  # inductor is a short at DC


def test_temperature_changes_the_thermal_voltage(write):
    text = "t\nV1 a 0 5\nR1 a k 10k\nD1 k 0 dm\n.model dm d (is=1e-14)\n"
    cold = solve_dc(read_netlist(write(text)), temp_c=-40).voltage("k")
    hot = solve_dc(read_netlist(write(text)), temp_c=125).voltage("k")
    assert hot < cold  # a forward diode drop falls with temperature (about -2 mV/K: common practice)
    assert 1.5e-3 < (cold - hot) / 165 < 2.6e-3
