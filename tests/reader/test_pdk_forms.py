"""The forms PDK libraries and schematic tools write, on netlists of our own.

Expected values are worked out by hand beside each check (plain arithmetic on the numbers
in the netlist), or come from the published rule named there.
"""

from __future__ import annotations

import pytest

from tauscan.errors import NetlistSyntaxError
from tauscan.op import operating_point
from tauscan.reader import read_netlist


def test_param_with_spaced_expression_braces_and_statistics(write):
    # the statement that stopped the reader on SKY130's parameter files, in a scenario of our own
    c = read_netlist(write(
        "t\n"
        ".param corner_factor=1 process_mc_factor=1 mc_switch=0\n"
        ".param sw_cd = {0.0+corner_factor*2.5e-9} + process_mc_factor*mc_switch*AGAUSS(0,1.5e-09,1)\n"
        ".param sw_cap = {1.0+corner_factor*0.19} + process_mc_factor*mc_switch*EXP(AGAUSS(0,0.1,1))\n"
        ".param spaced =  sw_cd * 2 + 1e-9\n"
        ".param quoted = {\"-sw_cd-1e-9/2\"}\n"
        "R1 a 0 {1/sw_cd}\nR2 a 0 {sw_cap*1k}\nR3 a 0 {1/spaced}\nR4 a 0 {-1/quoted}\nV1 a 0 1\n"))
    values = {e.name: e.value for e in c.elements if e.kind == "r"}
    # by hand: sw_cd = 2.5e-9 (+ 1*0*AGAUSS...: the nominal is 0, times 0)
    assert values["r1"] == pytest.approx(1 / 2.5e-9, rel=1e-12)
    # sw_cap = 1.19 + 0 * exp(0) = 1.19
    assert values["r2"] == pytest.approx(1190.0, rel=1e-12)
    assert values["r3"] == pytest.approx(1 / (2 * 2.5e-9 + 1e-9), rel=1e-12)
    assert values["r4"] == pytest.approx(1 / (2.5e-9 + 0.5e-9), rel=1e-12)


@pytest.mark.parametrize("call, nominal", [
    ("agauss(2.5, 0.1, 3)", 2.5), ("gauss(2.5, 0.1, 3)", 2.5), ("aunif(2.5, 0.1)", 2.5),
    ("unif(2.5, 0.1)", 2.5), ("limit(2.5, 0.1)", 2.5), ("agauss(2.5, 0.1, 3, 1)", 2.5),
])
def test_statistical_functions_give_their_nominal_value(write, call, nominal):
    # HSPICE-style statistical functions: the first argument is the nominal (common practice)
    c = read_netlist(write(f"t\nV1 a 0 1\nR1 a 0 {{1k*{call}}}\n"))
    assert c.element("r1").value == pytest.approx(1000 * nominal)


BINNED = """binned
.model nb.1 nmos level=1 vto=0.4 kp=100u lmin=0.15u lmax=1u wmin=0.42u wmax=3u
.model nb.2 nmos level=1 vto=0.5 kp=100u lmin=0.15u lmax=1u wmin=3u wmax=7u
.model nb.3 nmos level=1 vto=0.6 kp=100u lmin=1u lmax=8u wmin=0.42u wmax=7u
Vdd d 0 1.8
Vg g 0 1
M1 d g 0 0 nb w=2u l=0.5u
M2 d g 0 0 nb w=24u l=0.5u nf=4
M3 d g 0 0 nb w=5u l=2u
M4 d g 0 0 nb w=3u l=0.5u
"""


def test_bins_are_chosen_by_length_and_width_per_finger(write):
    c = read_netlist(write(BINNED))
    # the half-open rule lmin <= L < lmax, wmin <= W/nf < wmax (common practice, from memory)
    assert c.element("m1").model == "nb.1"  # W/nf = 2u
    assert c.element("m2").model == "nb.2"  # W/nf = 24u / 4 = 6u: the bin of a 6 um finger
    assert c.element("m3").model == "nb.3"  # L = 2u
    assert c.element("m4").model == "nb.2"  # W = 3u sits at wmax of bin 1: bin 2 takes it
    assert c.models["nb.2"].params["vto"] == 0.5


def test_no_bin_fits_is_a_located_error(write):
    path = write(BINNED + "M5 d g 0 0 nb w=2u l=10u\n")
    with pytest.raises(NetlistSyntaxError, match="no bin of model 'nb' fits L=10 um and W/nf=2 um") as info:
        read_netlist(path)
    assert (info.value.line, info.value.col) == (11, 12)  # the model field of the M5 line


WRAPPER = """wrapped
.subckt nw d g s b w=1 l=1 nf=1 ad=0 mult=1
Mnw d g s b nm w={w*1u} l={l*1u} ad={ad*1p} nf={nf}
.ends nw
.model nm nmos level=1 vto=0.5 kp=200u cgso=1n cgdo=1n
Vdd vdd 0 1.8
Vg g 0 0.9
Rd vdd d 5k
xm1 d g 0 0 nw w=2 l=0.5 nf=2 ad='int((nf+1)/2) * W/nf * 0.29' m=4
"""


def test_a_one_device_wrapper_is_named_by_its_instance(write):
    c = read_netlist(write(WRAPPER))
    m = c.element("xm1")
    assert m.kind == "m" and m.nodes == ("d", "g", "0", "0")
    # ad by hand: int((2+1)/2) * 2/2 * 0.29 = 0.29, times 1p from the wrapper
    assert m.params["ad"] == pytest.approx(0.29e-12, rel=1e-12)
    assert m.params["w"] == pytest.approx(2e-6) and m.params["l"] == pytest.approx(0.5e-6)
    # m=4 on the X line: four copies in parallel
    assert m.params["m"] == 4.0


def test_m_on_an_instance_equals_copies_in_parallel(write):
    # reference: the same stage with the four copies written out as four devices
    one = operating_point(read_netlist(write(WRAPPER, "one.sp")))
    copies = WRAPPER.replace("xm1 d g 0 0 nw w=2 l=0.5 nf=2 ad='int((nf+1)/2) * W/nf * 0.29' m=4\n", "".join(
        f"xm{k} d g 0 0 nw w=2 l=0.5 nf=2 ad=0.29\n" for k in range(1, 5)))
    four = operating_point(read_netlist(write(copies, "four.sp")))
    assert one.voltage("d") == pytest.approx(four.voltage("d"), rel=1e-9)
    assert one.device("xm1").current == pytest.approx(4 * four.device("xm1").current, rel=1e-9)


def test_m_multiplies_passives_and_sources_inside_an_instance(write):
    c = read_netlist(write("t\n.subckt cell a\nR1 a 0 3k\nC1 a 0 2p\nI1 0 a 1m\n.ends\nX1 n cell m=3\n"))
    r, cap = c.element("x1.r1"), c.element("x1.c1")
    # three copies in parallel: 3k / 3, 2p * 3, 1m * 3 (whether kept as a value or as m=)
    assert r.value / r.params.get("m", 1.0) == pytest.approx(1e3)
    assert cap.value * cap.params.get("m", 1.0) == pytest.approx(6e-12)
    assert c.element("x1.i1").value == pytest.approx(3e-3)


def test_instance_parameters_pass_the_callers_value_down(write):
    c = read_netlist(write("t\n.param w=3\n.subckt s a w=1\nR1 a 0 {w*1k}\n.ends\nX1 n s w={w}\n"))
    assert c.element("x1.r1").value == pytest.approx(3e3)  # w={w}: the caller's w, not itself


def test_option_scale_applies_to_geometry(write):
    c = read_netlist(write("t\n.option scale=1u\n.model nm nmos level=1 vto=0.5 kp=100u\n"
                           "Vd d 0 1\nM1 d d 0 0 nm w=2 l=0.15 ad=0.5 pd=3\n"))
    p = c.element("m1").params
    # SPICE scale: lengths times the scale, areas times its square
    assert (p["w"], p["l"], p["ad"], p["pd"]) == pytest.approx((2e-6, 0.15e-6, 0.5e-12, 3e-6))
    assert not any("scale" in w for w in c.warnings)


def test_option_scale_with_micro_suffix_warns(write):
    c = read_netlist(write("t\n.option scale=1u\n.model nm nmos level=1 vto=0.5 kp=100u\n"
                           "Vd d 0 1\nM1 d d 0 0 nm w=2u l=0.15u\nM2 d d 0 0 nm w=1u l=1u\n"))
    assert c.element("m1").params["w"] == pytest.approx(2e-12)  # picometres, as a simulator reads it
    said = [w for w in c.warnings if "below 1 nm" in w]
    assert len(said) == 1 and said[0].startswith("2 MOSFET(s)") and "m1" in said[0] and "w=2 l=0.15" in said[0]


def test_level_one_stands_in_for_bsim_once_per_card(write):
    text = ("t\n.subckt nw d g s b w=1\nMnw d g s b nb w={w*1u} l=1u\n"
            ".model nb nmos level=49 vth0=0.5 u0=0.03 toxe=4n k1=0.5 lambda=0\n.ends\n"
            "Vdd vdd 0 1.8\nVg g 0 0.9\nRd vdd d 5k\n"
            + "".join(f"xm{k} d g 0 0 nw w={k}\n" for k in range(1, 4)))
    op = operating_point(read_netlist(write(text)))
    said = [w for w in op.warnings if "level 1 stands in" in w]
    assert len(said) == 1  # three instances, three per-instance copies of the card: one warning
    assert "model nb (level 49" in said[0] and "VTH0 used as VTO" in said[0]
    # a BSIM card's LAMBDA (BSIM4's velocity overshoot) is not taken as the level-1 LAMBDA: a rough Early
    # voltage of 10 V per micron of L stands in (L = 1 um here: LAMBDA = 0.1/V)
    assert "LAMBDA=0.1/V" in said[0]
    gds = op.device("xm1").values["gds"]
    ids = op.device("xm1").current
    # square law with channel-length modulation: gds = lambda * Id / (1 + lambda * Vds) (Razavi ch. 2)
    vds = op.voltage("d")
    assert gds == pytest.approx(0.1 * ids / (1 + 0.1 * vds), rel=1e-6)


def test_unplaced_subcircuits_are_checked(write):
    c = read_netlist(write("t\n.subckt amp in out\nM1 out in 0 0 nx w=1u l=1u\n.ends\nV1 a 0 1\nR1 a 0 1k\n"))
    assert any(":3:15: model 'nx' is not defined (in subcircuit 'amp', which no instance places)" in w
               for w in c.warnings)


def test_bin_limits_with_expressions_are_evaluated(write):
    # a bin card whose limits are expressions takes the parsed path
    c = read_netlist(write("t\n.param lbound=1u\n.model nb.1 nmos level=1 vto=0.5 kp=1e-4 lmin={lbound/10} lmax={lbound}\n"
                           ".model nb.2 nmos level=1 vto=0.6 kp=1e-4 lmin={lbound} lmax={lbound*10}\n"
                           "Vd d 0 1\nM1 d d 0 0 nb w=1u l=0.5u\nM2 d d 0 0 nb w=1u l=5u\n"))
    assert (c.element("m1").model, c.element("m2").model) == ("nb.1", "nb.2")


def test_a_wrapped_device_stands_at_its_instance_line(write, tmp_path):
    # the wrapper in a library file of its own; the designer's X line carries a waiver
    (tmp_path / "lib.sp").write_text(".subckt nw d g s b w=1\nMnw d g s b nm w={w*1u} l=0.5u\n"
                                     ".model nm nmos level=1 vto=0.5 kp=200u cgso=1n cgdo=1n\n.ends\n")
    path = write("t\n.include lib.sp\nVdd vdd 0 1.8\nVg g 0 dc 0.9 ac 1\nRd vdd d 5k\n"
                 "xm1 d g 0 0 nw w=2 ; tauscan-waive[cgd]: overlap accepted by design\n")
    c = read_netlist(path)
    m = c.element("xm1")
    assert (m.file, m.line) == (path, 6) and "tauscan-waive[cgd]" in m.comment
    from tauscan.pipeline import ScanRequest, scan

    run = scan(ScanRequest(path))
    assert run.lint.waived.get("xm1:cgd") == "overlap accepted by design"
    cap = next(x for x in run.analysis.capacitors if x.name == "xm1:cgd")
    assert (cap.file, cap.line) == (path, 6)


def test_a_wrapper_card_is_shared_unless_it_names_a_differing_instance_parameter(write):
    # our own wrapper: card 'fixed' names nothing of the instance, card 'sized' names its rdsw
    # parameter (computed from w): equal w share one Model, another w gets its own
    text = ("t\n.subckt dev d g s b w=1\n.param rw={100/w}\nm1 d g s b {kind} w={w*1u} l=1u\n"
            ".model fixed nmos level=1 vto=0.5 kp=100u\n.model sized nmos level=1 vto=0.5 kp=100u rd={rw}\n.ends\n"
            "Vdd vdd 0 1.8\nVg g 0 1\n")
    for kind in ("fixed", "sized"):
        body = text.replace("{kind}", kind) + "".join(f"xm{k} vdd g 0 0 dev w={w}\n" for k, w in enumerate((1, 1, 2)))
        c = read_netlist(write(body, f"{kind}.sp"))
        names = [c.element(f"xm{k}").model for k in range(3)]
        if kind == "fixed":
            assert names == ["dev/fixed"] * 3
        else:
            assert names[0] == names[1] != names[2]
            assert c.models[names[0]].params["rd"] == 100.0 and c.models[names[2]].params["rd"] == 50.0
