"""Level-1 MOSFET against the square-law closed forms (Shichman and Hodges 1968;
Razavi, Design of Analog CMOS Integrated Circuits, 2nd ed., ch. 2) and Meyer's
capacitances (Meyer 1971)."""

import math

import numpy as np
import pytest
from numpy.testing import assert_allclose

from tauscan.devices.mosfet import meyer
from tauscan.errors import CircuitError
from tauscan.op import solve_dc
from tauscan.reader import read_netlist

EPS_OX = 3.9 * 8.8541878128e-12  # F/m (CODATA eps0, relative permittivity 3.9 from memory)


def stage(write, *, vg=0.8, rd="10k", lam=0.0, extra="", model_extra="", w="10u", l="1u", kind="nmos"):
    return read_netlist(write(
        "resistor-loaded common-source stage\n"
        f"Vdd vdd 0 1.8\nVg g 0 {vg}\nRd vdd d {rd}\n"
        f"M1 d g 0 0 mn w={w} l={l} {extra}\n"
        f".model mn {kind} (vto=0.5 kp=100u lambda={lam} {model_extra})\n"
    ))


def test_saturation_matches_the_square_law(write):
    op = solve_dc(stage(write))
    beta = 100e-6 * 10 / 1.0
    i_d = 0.5 * beta * (0.8 - 0.5) ** 2  # Shichman-Hodges saturation current, lambda = 0
    m = op.device("m1")
    assert m.region == "saturation"
    assert_allclose(m.current, i_d, rtol=1e-6)
    assert_allclose(op.voltage("d"), 1.8 - i_d * 10e3, rtol=1e-6)


def test_small_signal_values_in_saturation(write):
    # with lambda: ID = beta/2 Vov^2 (1 + lambda VDS); gm = 2 ID / Vov; gds = lambda ID / (1 + lambda VDS)
    op = solve_dc(stage(write, lam=0.1))
    m = op.device("m1")
    vds = op.voltage("d")
    vov = 0.3
    i_d = 0.5 * 1e-3 * vov**2 * (1 + 0.1 * vds)
    assert_allclose(m.current, i_d, rtol=1e-6)
    assert_allclose(vds, 1.8 - i_d * 10e3, rtol=1e-6)
    assert_allclose(m.values["gm"], 2 * i_d / vov, rtol=1e-6)
    assert_allclose(m.values["gds"], 0.1 * i_d / (1 + 0.1 * vds), rtol=1e-6)


def test_triode_closed_form(write):
    # large load: the device leaves saturation; solve VDS from the triode law by hand:
    # ID = beta (Vov VDS - VDS^2/2) and ID = (VDD - VDS)/RD  -> quadratic in VDS
    op = solve_dc(stage(write, vg=1.5, rd="100k"))
    beta, vov, rd, vdd = 1e-3, 1.0, 100e3, 1.8
    # beta/2 VDS^2 - (beta Vov + 1/RD) VDS + VDD/RD = 0, smaller root
    a, b, c = beta / 2, -(beta * vov + 1 / rd), vdd / rd
    vds = (-b - math.sqrt(b * b - 4 * a * c)) / (2 * a)
    assert op.device("m1").region == "triode"
    assert_allclose(op.voltage("d"), vds, rtol=1e-6)


def test_cutoff(write):
    op = solve_dc(stage(write, vg=0.3))
    assert op.device("m1").region == "cutoff"
    assert abs(op.device("m1").current) < 1e-12
    assert_allclose(op.voltage("d"), 1.8, atol=1e-6)


def test_pmos_mirror_image(write):
    c = read_netlist(write("pmos stage\nVdd vdd 0 1.8\nVg g 0 1.0\nRd d 0 10k\nM1 d g vdd vdd mp w=10u l=1u\n"
                           ".model mp pmos (vto=-0.5 kp=100u)\n"))
    op = solve_dc(c)
    i_d = 0.5 * 1e-3 * (1.8 - 1.0 - 0.5) ** 2
    assert_allclose(op.voltage("d"), i_d * 10e3, rtol=1e-6)
    assert_allclose(op.device("m1").current, -i_d, rtol=1e-6)  # drain current flows out of the drain


def test_source_drain_swap(write):
    # the 'drain' terminal is at the lower voltage: the device conducts from s to d
    c = read_netlist(write("swapped\nVdd vdd 0 1.8\nVg g 0 1.8\nR1 vdd s 10k\nM1 0 g s 0 mn w=10u l=1u\n.model mn nmos (vto=0.5 kp=100u)\n"))
    op = solve_dc(c)
    m = op.device("m1")
    assert m.nodes["d"] == "s" and m.nodes["s"] == "0"
    assert m.current < 0  # current leaves the physical drain terminal


def test_body_effect_threshold(write):
    # VT = VTO + GAMMA (sqrt(PHI + VSB) - sqrt(PHI)), source follower with VSB = VS
    c = read_netlist(write("follower\nVdd vdd 0 3\nVg g 0 2\nM1 vdd g s 0 mn w=10u l=1u\nIs s 0 50u\n"
                           ".model mn nmos (vto=0.5 kp=100u gamma=0.5 phi=0.7)\n"))
    op = solve_dc(c)
    vs = op.voltage("s")
    vt = 0.5 + 0.5 * (math.sqrt(0.7 + vs) - math.sqrt(0.7))
    vov = math.sqrt(2 * 50e-6 / 1e-3)
    assert_allclose(2 - vs, vt + vov, rtol=1e-6)
    m = op.device("m1")
    # gmb = gm * gamma / (2 sqrt(PHI + VSB)) (Razavi ch. 2)
    assert_allclose(m.values["gmb"], m.values["gm"] * 0.5 / (2 * math.sqrt(0.7 + vs)), rtol=1e-6)


def test_kp_from_uo_and_tox_and_gate_capacitance(write):
    c = stage(write, model_extra="kp=0 uo=500 tox=10n cgso=0.2n cgdo=0.3n ld=0.1u".replace("kp=0 ", ""), lam=0.0)
    c.models["mn"].params.pop("kp")
    op = solve_dc(c)
    cox = EPS_OX / 10e-9
    kp = 500e-4 * cox
    leff = 1e-6 - 2 * 0.1e-6
    beta = kp * 10e-6 / leff
    i_d = 0.5 * beta * 0.3**2
    m = op.device("m1")
    assert_allclose(m.current, i_d, rtol=1e-6)
    # saturation: Cgs = 2/3 Cox W Leff + CGSO W, Cgd = CGDO W (Meyer 1971)
    assert_allclose(m.caps["cgs"], 2 / 3 * cox * 10e-6 * leff + 0.2e-9 * 10e-6, rtol=1e-9)
    assert_allclose(m.caps["cgd"], 0.3e-9 * 10e-6, rtol=1e-9)


def test_no_tox_means_no_intrinsic_gate_capacitance(write):
    op = solve_dc(stage(write, model_extra="cgdo=1n"))
    m = op.device("m1")
    assert m.caps["cgs"] == 0 and m.caps["cgb"] == 0
    assert_allclose(m.caps["cgd"], 1e-9 * 10e-6)


def test_meyer_regions():
    cox = np.array([1.0] * 5)
    phi = np.array([0.6] * 5)
    vgst = np.array([-1.0, -0.2, 0.5, 0.5, 0.5])
    vds = np.array([0.0, 0.0, 1.0, 0.0, 0.25])
    cgs, cgd, cgb = meyer(vgst, vds, cox, phi)
    assert_allclose(cgb[:2], [1.0, 0.2 / 0.6])  # accumulation, depletion
    assert_allclose(cgs[1], 2 / 3 * (1 - 0.4 / 0.6))
    assert_allclose([cgs[2], cgd[2]], [2 / 3, 0.0])  # saturation
    assert_allclose([cgs[3], cgd[3]], [0.5, 0.5])  # triode at VDS = 0: Cox/2 each
    # triode in between: 2/3 Cox (1 - (Vdsat-Vds)^2/(2Vdsat-Vds)^2), 2/3 Cox (1 - Vdsat^2/(2Vdsat-Vds)^2)
    assert_allclose([cgs[4], cgd[4]], [2 / 3 * (1 - 0.25**2 / 0.75**2), 2 / 3 * (1 - 0.25 / 0.5625)])


def test_short_effective_length_is_refused(write):
    with pytest.raises(CircuitError, match="L - 2\\*LD"):
        solve_dc(stage(write, l="0.2u", model_extra="ld=0.1u"))


def test_bsim_card_is_mapped_with_warnings(write):
    c = read_netlist(write("bsim\nVdd vdd 0 1.8\nVg g 0 0.8\nRd vdd d 1k\nM1 d g 0 0 nb w=10u l=1u\n"
                           ".model nb nmos level=49 vth0=0.5 u0=0.03 toxe=2n k1=0.4 lambda=0.05\n"))
    op = solve_dc(c)
    text = " ".join(op.warnings)
    assert "VTH0 used as VTO" in text and "U0" in text and "--op" in text
    # the level-1 square law with the mapped parameters (Razavi ch. 2): KP = U0 COX, VTO = VTH0,
    # and a LAMBDA of 1 / (10 V/um * L) = 0.1/V for L = 1 um, not the card's BSIM LAMBDA
    kp = 0.03 * EPS_OX / 2e-9
    vds = op.voltage("d")
    assert op.device("m1").region == "saturation"
    ids = 0.5 * kp * 10 * (0.8 - 0.5) ** 2 * (1 + 0.1 * vds)
    assert_allclose(op.device("m1").current, ids, rtol=1e-6)
    assert_allclose(op.device("m1").values["gm"], kp * 10 * 0.3 * (1 + 0.1 * vds), rtol=1e-6)


def test_bsim_card_without_level1_equivalents_is_refused(write):
    c = read_netlist(write("bsim\nVdd vdd 0 1.8\nM1 vdd vdd 0 0 nb w=1u l=1u\n.model nb nmos level=49 toxe=2n\n"))
    with pytest.raises(CircuitError, match="no level-1 equivalent"):
        solve_dc(c)


def test_wrong_model_type(write):
    c = read_netlist(write("t\nVdd vdd 0 1.8\nM1 vdd vdd 0 0 qn\n.model qn npn\n"))
    with pytest.raises(CircuitError, match="not nmos or pmos"):
        solve_dc(c)


def test_singular_dc_system_names_the_unknowns(write):
    # a matrix whose null vector is known (numpy's SVD finds it): the second unknown is free
    import scipy.sparse as sp

    from tauscan.op.solver import DCSolver

    solver = DCSolver(read_netlist(write("t\nV1 a 0 1\nR1 a b 1k\nR2 b 0 1k\n")), 27.0)
    unknowns = solver._unknown_names()
    assert unknowns == ["node a", "node b", "current of v1"]
    a = sp.csc_matrix(np.diag([1.0, 0.0, 1.0]))
    err = solver._singular(a)
    assert err.message.endswith("it leaves undetermined node b")
