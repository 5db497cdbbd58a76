"""Plain R and C lines are read in columns, without the grammar: the columns must hold exactly
what the card path (the grammar and the element rules) makes of the same lines, in the same
order, with the same errors."""

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from tauscan.errors import ExpressionError, NetlistSyntaxError
from tauscan.reader import lines as lines_mod
from tauscan.reader import read_netlist
from tauscan.reader.fields import Param, Word, grammar_fields
from tauscan.reader.lines import PLAIN_BLOCK, PLAIN_DEVICE, PLAIN_LINE, Card

from tests.conftest import examples

# words that a netlist may hold: names with the punctuation extractors use, numbers with
# suffixes, and the characters the grammar treats apart
word = st.text(alphabet="abcxyzRC019_.<>#:!$@-+*/;={}()'\",", min_size=1, max_size=6)
sep = st.sampled_from([" ", "  ", "\t", " \t"])


@st.composite
def two_terminal_lines(draw):
    parts = [draw(st.sampled_from("RrCcMx")) + draw(word)] + [draw(word) for _ in range(draw(st.integers(2, 4)))]
    text = "".join(p + draw(sep) for p in parts)
    return text if draw(st.booleans()) else text.rstrip()


def _agree(text: str) -> None:
    match = PLAIN_LINE.fullmatch(text)
    # the chunk search takes exactly the lines the pattern matches into its blocks, between
    # other lines and at the end of the text
    for tail in ("* after\n", ""):
        found = list(PLAIN_BLOCK.finditer(f"* before\n{text}\n{tail}"))
        blocks = "".join(m.group(1) for m in found)
        others = [m.group()[len(m.group(1)):] for m in found]
        assert blocks == (text + "\n" if match else ""), text
        assert [x for x in others if x] == ["* before\n"] + ([] if match else [text + "\n"]) + ([tail] if tail else [])
    if match is None:
        return  # the card path reads it
    kind, fields = grammar_fields(Card(text, "f", 1))
    assert kind == "element", text
    assert [type(f) for f in fields] == [Word] * 4, text
    assert [f.text.lower() for f in fields] == [g.lower() for g in match.groups()], text


@settings(max_examples=examples(600), deadline=None)
@given(two_terminal_lines())
def test_a_plain_line_is_what_the_grammar_reads(text):
    _agree(text)


def test_plain_and_not_plain():
    plain = ["R1 a b 1k", "c_par.3 n<1> 0 .5f", "Rx a b RVAL", "C9\tx y 1E-15  "]
    for text in plain:
        assert PLAIN_LINE.fullmatch(text), text
        _agree(text)
    for text in ["R1 a b 1k ; c", "R1 a b 1k m=2", "R1 a b {r}", "R1 a b", "R1 a b 1 2", " R1 a b 1",
                 "M1 a b c d", "R1 a .b 1", "R1 a b 'r'", "L1 a b 1n", "R1 a $b 1"]:
        assert PLAIN_LINE.fullmatch(text) is None, text


@st.composite
def mosfet_lines(draw):
    nodes = [draw(word) for _ in range(5)]
    pairs = [draw(word) + "=" + draw(word) for _ in range(draw(st.integers(0, 3)))]
    parts = [draw(st.sampled_from("Mm")) + draw(word)] + nodes + pairs
    return "".join(p + draw(sep) for p in parts).rstrip()


@settings(max_examples=examples(600), deadline=None)
@given(mosfet_lines())
def test_a_plain_mosfet_line_is_what_the_grammar_reads(text):
    """A line the plain MOSFET pattern takes is split by the flattener into words and
    ``key=value`` pairs; the grammar must read the same fields from it."""
    if PLAIN_DEVICE.fullmatch(text) is None:
        return  # the card path reads it
    found = PLAIN_BLOCK.findall(f"* before\n{text}\n")
    assert found[:2] == [("", "", "* before"), ("", text, "")], text  # the chunk search marks it too
    kind, fields = grammar_fields(Card(text, "f", 1))
    assert kind == "element", text
    words = text.lower().split()
    assert [type(f) for f in fields] == [Word] * 6 + [Param] * (len(words) - 6), text
    assert [f.text.lower() for f in fields[:6]] == words[:6], text
    pairs = "=".join(words[6:]).split("=")
    assert [(f.key, f.value.text.lower()) for f in fields[6:]] == list(zip(pairs[0::2], pairs[1::2])), text


NETLIST = """mixed plain and card lines
.param rval=2k wpar=3u
.model nch nmos (vto=0.4 kp=100u)
.global vdd
.subckt cell in out
Rin in mid 1k
Cm mid out 0.5p
Mx out mid 0 gnd NCH W=2U L=0.5u AD=1p
R2 mid vdd {rval}
Cg mid gnd 2f
.ends
V1 vdd 0 1.8
M1 n2 n1 0 0 nch w=1u l=0.2u
M2 n3 n2 0 0 nch w=wpar l=1u
M3 n4 n3 0 0 nch w=1u
* a comment between continuation lines
+ l=0.3u
Ra vdd n1 rval
Ca n1 0 1p
X1 n1 n2 cell
X2 n2 n3 cell
Rb n3 0 10k
* a comment inside a run
Cb n3 gnd 3f
Rc n3 n4 1k
+ m=2
.control
R9 a b 1
.endc
Cz n4 0 0
Rd n4 0 1meg
.end
Rafter a b 1
"""


def _all(circuit):
    return [(e.name, e.kind, e.nodes, e.value, e.model, e.params, e.line) for e in circuit.elements]


@pytest.mark.parametrize("chunk", [7, 40, 1 << 20])
def test_columns_hold_what_the_card_path_makes(tmp_path, monkeypatch, chunk):
    monkeypatch.setattr(lines_mod, "CHUNK_BYTES", chunk)
    plain = tmp_path / "plain.sp"
    plain.write_text(NETLIST)
    # the same netlist with every line made not plain (an inline comment on each element line)
    carded = tmp_path / "carded.sp"
    carded.write_text("".join(line + (" ; card\n" if line[:1] in "RCM" else "\n") for line in NETLIST.splitlines()))
    a = read_netlist(str(plain))
    b = read_netlist(str(carded))
    assert len(a.passives) > 0 and len(b.passives) == 0
    assert _all(a) == _all(b)
    assert a.nodes() == b.nodes()
    assert [w.replace("plain.sp", "x") for w in a.warnings] == [w.replace("carded.sp", "x") for w in b.warnings]
    names = [e.name for e in a.elements]
    # hand-derived: subcircuit rows take the instance path, nodes the pins, globals and ground
    assert names == ["v1", "m1", "m2", "m3", "ra", "ca", "x1.rin", "x1.cm", "x1.mx", "x1.r2", "x1.cg", "x2.rin",
                     "x2.cm", "x2.mx", "x2.r2", "x2.cg", "rb", "cb", "rc", "cz", "rd"]
    by_name = {e.name: e for e in a.elements}
    assert by_name["x2.cm"].nodes == ("x2.mid", "n3")
    assert by_name["x1.cg"].nodes == ("x1.mid", "0")
    assert by_name["x1.r2"].value == 2000.0 and by_name["x1.r2"].nodes == ("x1.mid", "vdd")
    assert by_name["ra"].value == 2000.0
    assert by_name["rc"].params == {"m": 2.0}  # continued: a card, not a plain row
    assert by_name["rd"].value == 1e6
    assert by_name["x2.mx"].nodes == ("n3", "x2.mid", "0", "0") and by_name["x2.mx"].model == "nch"
    assert by_name["x2.mx"].params == {"w": 2e-6, "l": 0.5e-6, "ad": 1e-12}
    assert by_name["m2"].params == {"w": 3e-6, "l": 1e-6}  # a parameter's name, through the card path
    assert by_name["m3"].params == {"w": 1e-6, "l": 0.3e-6}  # continued
    assert any("capacitor cz has zero value" in w for w in a.warnings)


@pytest.mark.parametrize("text, line, col, error, message", [
    ("t\nR1 a b 1k\nR2  b  c  0\n", 3, 11, NetlistSyntaxError, "zero resistance"),
    ("t\nC1 a b -1p\n", 2, 8, NetlistSyntaxError, "negative capacitance"),
    ("t\nR1 a b 1\nC2 a b 1p\nR1 b c 2\n", 4, 1, NetlistSyntaxError, "first at {}:2"),
    ("t\nR1 a b 1\nR1 b c 2 ; card\n", 3, 1, NetlistSyntaxError, "first at {}:2"),
    ("t\nR1 a b 1 ; card\nR1 b c 2\n", 3, 1, NetlistSyntaxError, "first at {}:2"),
    ("t\nR1 a b 1\nR2 b c 2\nR2 c d 3\n", 4, 1, NetlistSyntaxError, "first at {}:3"),
    ("t\nR1 a b 1\nR2 b c\tnowhere\n", 3, 8, ExpressionError, "undefined parameter 'nowhere'"),
    ("t\nR1 a b 1\nR2 B C 0K\n", 3, 8, NetlistSyntaxError, "zero resistance"),
    ("t\nC1 a b 1e999\n", 2, 8, NetlistSyntaxError, "out of range"),
    ("t\nR1 a b 1\nM1 d g s b nope w=1u\n", 3, 12, NetlistSyntaxError, "model 'nope' is not defined"),
    ("t\n.model n nmos\nM1 d g s b n\nR2 a b 1\nM1 d g s b n w=1u\n", 5, 1, NetlistSyntaxError, "first at {}:3"),
    # plain rows and plain MOSFET lines of one run: the first line at fault, in file order
    ("t\n.model n nmos\nR1 a b 1\nM1 d g s b n\nr1 x y 2\n", 5, 1, NetlistSyntaxError, "first at {}:3"),
    ("t\n.model n nmos\nMa d g s b n\nR1 a b 1\nmA x y z w n\n", 5, 1, NetlistSyntaxError, "first at {}:3"),
    ("t\n.model n nmos\nR1 a b 1\nM1 d g s b n\nR1 b c 2\nR2 c d 0\n", 5, 1, NetlistSyntaxError, "first at {}:3"),
    ("t\n.model n nmos\nR1 a b 1\nM1 d g s b n w=wx\nR2 c d 0\n", 4, 16, ExpressionError, "undefined parameter 'wx'"),
    ("t\n.model n nmos\nR1 a b 1\nM1 d g s b n\nR2 c d 0\nM2 d g s b nope\n", 5, 8, NetlistSyntaxError,
     "zero resistance"),
    ("t\n.model n nmos\nR1 a b 1\nM1 d g s b n\nR2 c d 1\nM2 d g s b nope\n", 6, 12, NetlistSyntaxError,
     "model 'nope' is not defined"),
    # a subcircuit's model card in error is met at the first MOSFET using it: after a plain
    # row in error before that MOSFET, before one after it
    ("t\n.subckt cell a\n.model n nmos (vto={nowhere})\nR1 a b 1\nR2 c d 0\nM1 d g s b n\n.ends\nX1 a cell\n",
     5, 8, NetlistSyntaxError, "zero resistance"),
    ("t\n.subckt cell a\n.model n nmos (vto={nowhere})\nR1 a b 1\nM1 d g s b n\nR2 c d 0\n.ends\nX1 a cell\n",
     3, 21, ExpressionError, "undefined parameter 'nowhere'"),
])
def test_errors_in_plain_lines_are_located(write, text, line, col, error, message):
    path = write(text)
    with pytest.raises(error) as info:
        read_netlist(path)
    assert (info.value.line, info.value.col) == (line, col)
    assert message.format(path) in info.value.message
    assert info.value.text == text.splitlines()[line - 1]


def test_the_written_out_white_space_is_what_python_counts_as_white_space():
    """The plain-line patterns list white space character by character (for speed); the list
    must be exactly what str.isspace and a pattern's \\s take (Python's documentation of
    str.split and of re's \\s)."""
    import re

    every = "".join(map(chr, range(0x110000)))
    listed = set(re.findall(f"[{lines_mod._SPACE}]", every))
    assert listed == {c for c in every if c.isspace()} == set(re.findall(r"\s", every))


def test_mosfet_lines_with_the_same_parameters_share_them_and_nothing_changes_them(tmp_path):
    """Plain MOSFET lines reading the same parameters share one dictionary; the values are
    those the card path gives, and reading, biasing and analysing leave them unchanged."""
    import sys
    from pathlib import Path

    from tauscan import api

    sys.path.insert(0, str(Path(__file__).resolve().parents[2] / "benchmarks"))
    from netlist_gen import stage_chain

    path = tmp_path / "chain.sp"
    path.write_text(stage_chain(400))
    circuit = read_netlist(str(path))
    mosfets = [e for e in circuit.elements if e.kind == "m"]
    assert len(mosfets) > 10
    assert len({id(e.params) for e in mosfets}) == 1  # one text, one dictionary
    # hand-read from the generator's line: w=4u l=0.5u ad=2p as=2p pd=5u ps=5u
    expected = {"w": 4e-6, "l": 0.5e-6, "ad": 2e-12, "as": 2e-12, "pd": 5e-6, "ps": 5e-6}
    assert mosfets[0].params == pytest.approx(expected)
    before = [dict(e.params) for e in mosfets]
    api.analyze(api.bias(circuit))  # on this very circuit
    assert [dict(e.params) for e in mosfets] == before
    carded = tmp_path / "carded.sp"
    carded.write_text("".join(line + (" ; card\n" if line[:1] == "M" else "\n") for line in stage_chain(400).splitlines()))
    assert [e.params for e in read_netlist(str(carded)).elements if e.kind == "m"] == before


@st.composite
def mixed_netlists(draw):
    """Netlists of plain R and C lines, plain MOSFET lines, continued lines, comments, blank
    lines and .control blocks in any order (names numbered so that none repeats)."""
    out = ["mixed", ".subckt pair a b", ".model nloc nmos (vto=0.4)", ".model ploc pmos (vto=-0.4)"]
    for k in range(draw(st.integers(0, 4))):  # local models: made in the order first used
        out.append(f"M{k} a b 0 0 {draw(st.sampled_from(['nloc', 'ploc']))} w=1u")
    out += [".ends", "X1 n1 n2 pair", ".model nch nmos (vto=0.4 kp=100u)", ".model pch pmos (vto=-0.4)"]
    for k in range(draw(st.integers(1, 40))):
        kind = draw(st.sampled_from(["r", "c", "m", "m+", "r+", "comment", "blank", "control", "v"]))
        if kind in ("r", "r+"):
            out.append(f"R{k} n{k % 5} n{(k + 1) % 5} {draw(st.sampled_from(['1k', '2.2K', '10', '1meg']))}")
            if kind == "r+":
                out.append(draw(st.sampled_from(["+ m=2", "* between\n+ m=3"])))
        elif kind == "c":
            out.append(f"C{k} n{k % 5} {draw(st.sampled_from(['0', 'gnd', 'n1']))} {draw(st.sampled_from(['1p', '0.5f', '3e-15']))}")
        elif kind in ("m", "m+"):
            out.append(f"M{k} n{k % 5} n1 0 0 {draw(st.sampled_from(['nch', 'pch']))} w={draw(st.sampled_from(['1u', '2u']))}")
            if kind == "m+":
                out.append("+ l=0.3u")
        elif kind == "comment":
            out.append("* a comment")
        elif kind == "blank":
            out.append("")
        elif kind == "control":
            out.append(f".control\nR9{k} a b 1\nM9{k} a b c d nch\n.endc")
        else:
            out.append(f"V{k} n{k % 5} 0 1")
    out.append("V0x n0 0 1")
    return "\n".join(out) + "\n"


@settings(max_examples=examples(60), deadline=None)
@given(mixed_netlists(), st.sampled_from([5, 17, 64, 1 << 20]))
def test_any_mix_of_lines_reads_as_the_card_path_reads_it(tmp_path_factory, text, chunk):
    """The block search, at any chunk size, gives what the grammar's card path gives for the
    same netlist with every element line made a card (an inline comment on each)."""
    folder = tmp_path_factory.mktemp("mix")
    plain = folder / "plain.sp"
    plain.write_text(text)
    carded = folder / "carded.sp"
    carded.write_text("".join(line + (" ; card\n" if line[:1] in "RCM" else "\n") for line in text.splitlines()))
    saved = lines_mod.CHUNK_BYTES
    lines_mod.CHUNK_BYTES = chunk
    try:
        a = read_netlist(str(plain))
    finally:
        lines_mod.CHUNK_BYTES = saved
    b = read_netlist(str(carded))
    assert _all(a) == _all(b)
    assert list(a.models) == list(b.models)
    assert a.nodes() == b.nodes()
    assert [w.replace("plain.sp", "x") for w in a.warnings] == [w.replace("carded.sp", "x") for w in b.warnings]
