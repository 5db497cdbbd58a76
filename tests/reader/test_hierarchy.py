"""Hierarchy, parameters and the flat circuit, against expectations derived by
hand for a netlist written for these tests."""

import pytest

from tauscan.reader import read_netlist

NETLIST = """\
hierarchical, parameterised test netlist
.param wn=2u ln=0.5u rl={2*rbase} rbase=5k
.global vdd
.subckt stage in out w=1u mult=1
M1 out in 0 0 nch w={w*mult} l=ln
Rl vdd out {rl}
.subckt inner a
Cx a 0 {w*1e-9}
.ends inner
Xc out inner
.ends stage
.subckt pair in out
Xa in mid stage w=wn
Xb mid out stage mult=3
.ends pair
Xtop in out pair
V1 vdd 0 dc 1.8
Vin in 0 DC 0.9 AC 1 0
Cl out 0 10f
.model nch nmos level=1 (vto=0.45 kp=250u
+ lambda=0.05)
.temp 55
.options reltol=1e-4 gmin=1e-13 acct
.tran 1n 100n
.op
.end
"""


@pytest.fixture
def circuit(write):
    return read_netlist(write(NETLIST))


def test_names_and_nodes_follow_the_instance_path(circuit):
    names = [e.name for e in circuit.elements]
    assert names == [
        "xtop.xa.m1", "xtop.xa.rl", "xtop.xa.xc.cx",
        "xtop.xb.m1", "xtop.xb.rl", "xtop.xb.xc.cx",
        "v1", "vin", "cl",
    ]
    m = circuit.element("xtop.xa.m1")
    assert m.nodes == ("xtop.mid", "in", "0", "0")
    assert circuit.element("xtop.xb.m1").nodes == ("out", "xtop.mid", "0", "0")
    # global node vdd keeps its name inside the hierarchy
    assert circuit.element("xtop.xa.rl").nodes == ("vdd", "xtop.mid")
    assert circuit.element("xtop.xa.xc.cx").nodes == ("xtop.mid", "0")


def test_parameter_scope_instance_over_default_over_global(circuit):
    # Xa overrides w=wn=2u; Xb keeps the default w=1u and sets mult=3
    assert circuit.element("xtop.xa.m1").params == {"w": 2e-6, "l": 0.5e-6}
    assert circuit.element("xtop.xb.m1").params["w"] == pytest.approx(3e-6, rel=1e-15)
    # rl = 2*rbase, defined before rbase: evaluated lazily
    assert circuit.element("xtop.xa.rl").value == 10e3
    # the nested subcircuit sees its caller's w (2u in xa, 1u in xb)
    assert circuit.element("xtop.xa.xc.cx").value == pytest.approx(2e-15)
    assert circuit.element("xtop.xb.xc.cx").value == pytest.approx(1e-15)


def test_sources_models_and_settings(circuit):
    vin = circuit.element("vin")
    assert vin.value == 0.9 and vin.source.ac_mag == 1.0 and vin.source.ac_phase == 0.0
    model = circuit.models["nch"]
    assert model.type == "nmos"
    assert model.params == {"level": 1.0, "vto": 0.45, "kp": 250e-6, "lambda": 0.05}
    assert circuit.temp_c == 55.0
    assert circuit.options["reltol"] == 1e-4 and circuit.options["acct"] == "on"
    assert circuit.title.startswith("hierarchical")
    assert circuit.element("cl").line == 19


def test_param_overrides_from_the_caller(write):
    c = read_netlist(write(NETLIST), {"rbase": 1e3})
    assert c.element("xtop.xa.rl").value == 2e3


def test_waveforms_are_kept_and_dc_comes_from_time_zero(write):
    c = read_netlist(write("t\nV1 a 0 PULSE(0.2 1 1n 1n 1n 5n 10n)\nV2 b 0 dc 0.5 sin(0 1 1k)\n"
                           "I1 c 0 pwl(0 1m 1n 2m)\nV3 d 0 exp(0.3 1 0 1n 2n 3n)\nR1 a b 1\nR2 c d 1\n"))
    v1, v2, i1, v3 = (c.element(n) for n in ("v1", "v2", "i1", "v3"))
    assert v1.source.waveform.kind == "pulse" and v1.value == 0.2
    assert v2.value == 0.5 and v2.source.waveform.args == (0.0, 1.0, 1000.0)
    assert i1.value == 1e-3
    assert v3.value == 0.3


def test_lib_sections_and_includes(write, tmp_path):
    write(".lib tt\n.model nch nmos vto=0.4\n.endl tt\n.lib ss\n.model nch nmos vto=0.6\n.endl ss\n", "models/corners.lib")
    write("R9 a 0 9k\n", "parts/r9.inc")
    top = write("t\n.lib 'models/corners.lib' ss\n.include \"parts/r9.inc\"\nM1 a a 0 0 nch w=1u l=1u\n")
    c = read_netlist(top)
    assert c.models["nch"].params["vto"] == 0.6
    assert c.element("r9").file.endswith("r9.inc")


def test_model_without_parentheses_over_continuations(write):
    c = read_netlist(write("t\n.model qn npn is=1e-16\n+ bf=100 vaf=50\nQ1 c b e qn\nQ2 c b e sub qn 2\n"))
    assert c.models["qn"].params == {"is": 1e-16, "bf": 100.0, "vaf": 50.0}
    assert c.element("q1").nodes == ("c", "b", "e")
    assert c.element("q2").nodes == ("c", "b", "e", "sub") and c.element("q2").params["area"] == 2.0


def test_controlled_sources_and_coupling(write):
    c = read_netlist(write("t\nV1 a 0 1\nE1 b 0 a 0 -10\nG1 c 0 a 0 1m\nF1 d 0 v1 2\nH1 e 0 v1 1k\n"
                           "L1 a b 1u\nL2 c d 1u\nK1 L1 L2 0.5\nR1 b c 1\nR2 d e 1\n"))
    assert c.element("e1").value == -10 and c.element("e1").nodes == ("b", "0", "a", "0")
    assert c.element("f1").control == ("v1",)
    assert c.element("k1").control == ("l1", "l2") and c.element("k1").value == 0.5


def test_subckt_params_keyword_and_local_models(write):
    c = read_netlist(write("t\n.subckt cell a b params: r=1k\n.model dl d is=1e-14\nD1 a b dl\nR1 a b r\n.ends\n"
                           "X1 n1 0 cell r=2k\nX2 n2 0 cell\n"))
    assert c.element("x1.r1").value == 2e3 and c.element("x2.r1").value == 1e3
    # the local card names no instance parameter: one Model for both instances, named by its subcircuit
    assert c.element("x1.d1").model == c.element("x2.d1").model == "cell/dl" and "cell/dl" in c.models
