"""The bad-input catalogue: one small netlist per kind of mistake in tests/bad/, plus
generated giants.  Each must end with exit code 2 and one located message (or 0/1 with a
warning where the netlist is legal but suspicious), no traceback, and never hang: every run
has a hard time limit (a guard against hangs, not a speed test)."""

import json
import time
from pathlib import Path

import pytest

from tests.conftest import ROOT, run_cli

BAD = ROOT / "tests" / "bad"
HANG_GUARD_S = 120


def expectation(path: Path) -> tuple[int, str]:
    data = path.read_bytes()
    if not data:
        return 2, "empty"
    first = data.split(b"\n", 1)[0].decode("utf-8", "replace").lstrip("\ufeff").strip()
    assert first.startswith("* expect:"), f"{path.name} has no expectation line"
    code, _, message = first[len("* expect:"):].strip().partition(" ")
    return int(code), message.strip()


CASES = sorted(p.name for p in BAD.glob("*.sp"))


@pytest.mark.parametrize("name", CASES)
def test_catalogue(name, tmp_path):
    path = BAD / name
    code, message = expectation(path)
    before = sorted(p.name for p in BAD.iterdir())
    command = "check" if code == 1 else "scan"
    result = run_cli(command, str(path), "--format", "json", cwd=str(tmp_path), timeout=HANG_GUARD_S)
    assert result.returncode == code, result.stdout[-2000:] + result.stderr
    assert "Traceback" not in result.stderr
    if code == 2:
        lines = result.stderr.splitlines()
        assert lines and lines[0].startswith(str(path)), result.stderr
        assert message in lines[0], lines[0]
        assert result.stdout == ""
    else:
        data = json.loads(result.stdout)
        text = json.dumps(data)
        assert "NaN" not in text and "Infinity" not in text
        if message:
            assert message in text, text[:2000]
    assert not (tmp_path / "MARKER").exists()
    assert sorted(p.name for p in BAD.iterdir()) == before  # nothing written next to the netlist


def _run_generated(tmp_path, name, text_or_bytes):
    path = tmp_path / name
    if isinstance(text_or_bytes, bytes):
        path.write_bytes(text_or_bytes)
    else:
        path.write_text(text_or_bytes)
    start = time.perf_counter()
    result = run_cli("scan", str(path), "--format", "json", timeout=HANG_GUARD_S)
    return path, result, time.perf_counter() - start


def test_line_of_ten_megabytes(tmp_path):
    path, result, _ = _run_generated(tmp_path, "long.sp", "t\nR1 a 0 " + "1" * 10_000_000 + "\n")
    assert result.returncode == 2 and "longer than the limit" in result.stderr
    assert result.stderr.startswith(f"{path}:2:1:")


def test_subcircuits_nested_ten_thousand_deep(tmp_path):
    lines = ["deep"]
    for k in range(10_000):
        lines += [f".subckt s{k} a", f"X1 a s{k + 1}" if k < 9_999 else "R1 a 0 1k", ".ends"]
    lines.append("V1 top 0 dc 1 ac 1\nX0 top s0")
    path, result, _ = _run_generated(tmp_path, "deep.sp", "\n".join(lines) + "\n")
    assert result.returncode == 2 and "nested deeper than 1000" in result.stderr
    assert result.stderr.startswith(str(path) + ":")


def test_expression_nested_ten_thousand_deep(tmp_path):
    expr = "(" * 10_000 + "1" + ")" * 10_000
    path, result, _ = _run_generated(tmp_path, "expr.sp", f"t\nV1 a 0 1\nR1 a 0 {{{expr}}}\n")
    assert result.returncode == 2 and "nested deeper" in result.stderr
    assert result.stderr.startswith(f"{path}:3:")


def test_no_eval_or_exec_in_the_source():
    import re

    pattern = re.compile(r"(^|[^a-zA-Z_.])(eval|exec|compile|__import__)\(")
    offenders = []
    for path in (ROOT / "src").rglob("*.py"):
        for number, line in enumerate(path.read_text().splitlines(), start=1):
            if pattern.search(line.split("#", 1)[0]):
                offenders.append(f"{path}:{number}: {line.strip()}")
    assert offenders == []


def test_include_errors_name_the_resolved_path(tmp_path):
    sub = tmp_path / "blocks"
    sub.mkdir()
    (sub / "top.sp").write_text("t\n.include '../models/missing.lib'\nR1 a 0 1\n")
    result = run_cli("scan", str(sub / "top.sp"), timeout=HANG_GUARD_S)
    assert result.returncode == 2
    # resolved relative to the including file, and shown resolved
    assert str(tmp_path / "models" / "missing.lib") in result.stderr.splitlines()[0]
