"""Every user mistake: exit code 2, one located message, the line with a caret, no traceback.

Run through the real entry point (``python -m tauscan expand``)."""

import pytest

from tests.conftest import run_cli

CASES = {
    "unknown element letter": ("t\nR1 a b 1k\nZ1 a b 1\n", 3, "unknown element letter"),
    "missing value": ("t\nR1 a b\n", 2, "missing resistance value"),
    "non-numeric value": ("t\nR1 a b 1k+\n", 2, "cannot read the expression"),
    "undefined parameter": ("t\nR1 a b {rx*2}\n", 2, "undefined parameter 'rx'"),
    "division by zero": ("t\n.param z=0\nR1 a b {1/z}\n", 3, "division by zero"),
    "parameter cycle": ("t\n.param a={b+1} b={a*2}\nR1 x y {a}\n", 2, "depends on itself"),
    "unclosed subckt": ("t\n.subckt s a b\nR1 a b 1\nX1 n 0 s\n", 2, "never closed"),
    "unmatched ends": ("t\nR1 a b 1\n.ends\n", 3, "no open '.subckt'"),
    "ends with the wrong name": ("t\n.subckt s a\nR1 a 0 1\n.ends q\n", 4, "closes '.subckt s'"),
    "unknown subcircuit": ("t\nX1 a b nosuch\n", 2, "unknown subcircuit 'nosuch'"),
    "wrong pin count": ("t\n.subckt s a b\nR1 a b 1\n.ends\nX1 n s\n", 5, "has 2 pins, the instance gives 1"),
    "self-instantiating subcircuit": ("t\n.subckt s a\nX1 a s\n.ends\nX0 n s\n", 3, "instantiates itself"),
    "mutually recursive subcircuits": ("t\n.subckt p a\nX1 a q\n.ends\n.subckt q a\nX1 a p\n.ends\nX0 n p\n", None, "instantiates itself"),
    "missing include": ("t\n.include 'nothere.sp'\n", 2, "file not found"),
    "unknown lib section": ("t\n.lib 'lib.sp' ff\n", 2, "section 'ff' not found"),
    "empty file": ("", 1, "empty"),
    "python call in an expression": ("t\nR1 a b {__import__('os').system('touch MARKER')}\n", 2, "cannot read the expression"),
    "unknown parameter on an instance": ("t\n.subckt s a w=1\nR1 a 0 {w}\n.ends\nX1 n s q=2\n", 5, "has no parameter 'q'"),
    "undefined model": ("t\nM1 d g s b nope\n", 2, "model 'nope' is not defined"),
    "duplicate element": ("t\nR1 a b 1\nR1 b c 2\n", 3, "defined twice"),
    "unclosed brace": ("t\nR1 a b {1+2\n", 2, "unclosed"),
    "value out of range": ("t\nC1 a b 1e400\n", 2, "out of range"),
    "undefined model on a Q line": ("t\nQ1 c b e nope\n", 2, "model 'nope' is not defined"),
    "no bin fits": ("t\n.model nb.1 nmos level=1 vto=0.5 kp=1e-4 lmin=1u lmax=2u wmin=1u wmax=10u\n"
                    "M1 d g 0 0 nb w=2u l=5u\n", 3, "no bin of model 'nb' fits L=5 um"),
    ".param text that is no assignment": ("t\n.param 3 + x\nR1 a 0 1\n", 2, "expected name=value"),
    "a library only": ("* lib\n.subckt s a\nR1 a 0 1\n.ends\n", 1, "only subcircuit definitions"),
    "undefined model in an unplaced subcircuit of a library": (
        "* lib\n.subckt s d g\nM1 d g 0 0 nope\n.ends\n", 3, "model 'nope' is not defined (in subcircuit 's'"),
    "m= on an instance is not positive": ("t\n.subckt s a\nR1 a 0 1\n.ends\nX1 n s m=0\n", 5, "'m=' must be positive"),
    "misspelt instance parameter": ("t\n.subckt s a width=1\nR1 a 0 {width}\n.ends\nX1 n s widht=2\n", 5, "did you mean 'width'"),
    "a Windows include path": ("t\n.include 'C:\\models\\n.lib'\nR1 a 0 1\n", 2, "'C:\\\\models\\\\n.lib'"),
    ".option scale not positive": ("t\n.option scale=0\nR1 a 0 1\n", 2, "must be a positive number"),
    ".option scale not a number": ("t\n.option scale=big\nR1 a 0 1\n", 2, "must be a positive number, not 'big'"),
    ".option scale without a value": ("t\n.option post scale\nR1 a 0 1\n", 2, "'.option scale' needs a value"),
    "a value after the AC phase": ("t\nV1 a 0 AC=1 2 3\nR1 a 0 1\n", 2, "after the AC magnitude and phase"),
    "an empty include name": ("t\n.include \"\"\nR1 a 0 1\n", 2, "needs a file name"),
}


@pytest.mark.parametrize("name", sorted(CASES))
def test_bad_netlist(name, tmp_path):
    text, line, message = CASES[name]
    (tmp_path / "lib.sp").write_text(".lib tt\nR9 a 0 1\n.endl\n")
    path = tmp_path / "bad.sp"
    path.write_text(text)
    result = run_cli("expand", str(path), cwd=str(tmp_path))
    assert result.returncode == 2, result.stdout + result.stderr
    assert "Traceback" not in result.stderr
    first = result.stderr.splitlines()[0]
    assert first.startswith(str(path) + ":"), first
    assert message in first, first
    if line is not None:
        assert first.startswith(f"{path}:{line}:"), first
    assert not (tmp_path / "MARKER").exists()
    assert result.stdout == ""


def test_include_cycle(tmp_path):
    (tmp_path / "a.inc").write_text(".include 'b.inc'\n")
    (tmp_path / "b.inc").write_text(".include 'a.inc'\n")
    top = tmp_path / "top.sp"
    top.write_text("t\n.include 'a.inc'\nR1 a b 1\n")
    result = run_cli("expand", str(top))
    assert result.returncode == 2
    assert "include cycle" in result.stderr and "b.inc:1:" in result.stderr


def test_binary_and_latin1_content(tmp_path):
    for data, message in ((b"t\nR1 a b 1\x00\x01\x02\n", "binary"), ("t\nR1 \xe9 b 1\n".encode("latin-1"), "not UTF-8")):
        path = tmp_path / "bin.sp"
        path.write_bytes(data)
        result = run_cli("expand", str(path))
        assert result.returncode == 2 and message in result.stderr and "Traceback" not in result.stderr


def test_caret_points_at_the_offending_column(tmp_path):
    path = tmp_path / "c.sp"
    path.write_text("t\nR1 a b 1k\nM1 d g s b nch\n+ w=1u l={2*lx}\n.model nch nmos\n")
    result = run_cli("expand", str(path))
    lines = result.stderr.splitlines()
    assert lines[0].startswith(f"{path}:4:")
    assert lines[1].strip() == "+ w=1u l={2*lx}"
    assert lines[2].index("^") == lines[1].index("{") + 1  # inside the braces


def test_analysis_cards_are_skipped_and_unknown_ones_warned(write):
    from tauscan.reader import read_netlist

    c = read_netlist(write("t\nR1 a 0 1\n.op\n.ac dec 10 1 1g\n.tran 1n 1u\n.noise v(a) v1 dec 10 1 1g\n.pz v(a) v1\n"
                           ".print v(a)\n.plot v(a)\n.meas tran x max v(a)\n.save all\n.frobnicate 1\n"))
    assert len(c.elements) == 1
    assert any(".frobnicate" in w for w in c.warnings)
