"""Fuzzing (hypothesis): mutations of the sample netlists -- deleted, inserted and swapped
characters and tokens -- and grammar-shaped random netlists, through every stage.  The
property: the tool either succeeds or raises our error family; never another exception,
never a hang, never a NaN in a report.  Short in CI; run long with TAUSCAN_FUZZ_FACTOR=50."""

import json
import math
import signal
from contextlib import contextmanager

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from tauscan.errors import TauscanError
from tauscan.pipeline import ScanRequest, scan
from tauscan.report import scan_json
from tests.conftest import SAMPLES, examples

SAMPLE_TEXTS = {p.name: p.read_text() for p in sorted(SAMPLES.glob("*.sp"))}
#: Longest one example may run before it counts as a hang (seconds).
HANG_S = 30

TOKENS = ["0", "1k", "{", "}", "'", "(", ")", "=", "+", "\n", "\n+ ", " ", ".subckt", ".ends", ".model", ".param",
          "X1", "M9", "Q7", "C3", "R2", "V5", "ac", "dc", "1e300", "-1", "nmos", "npn", "1/0", "*", ";", "$"]


@contextmanager
def hang_guard(seconds: int):
    def on_alarm(_signum, _frame):
        raise TimeoutError(f"an example ran longer than {seconds} s")

    old = signal.signal(signal.SIGALRM, on_alarm)
    signal.alarm(seconds)
    try:
        yield
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, old)


@st.composite
def mutated(draw):
    name = draw(st.sampled_from(sorted(SAMPLE_TEXTS)))
    text = SAMPLE_TEXTS[name]
    for _ in range(draw(st.integers(1, 6))):
        kind = draw(st.sampled_from(["delete", "insert", "swap", "token", "drop-line", "dup-line"]))
        pos = draw(st.integers(0, max(len(text) - 1, 0)))
        if kind == "delete":
            text = text[:pos] + text[pos + draw(st.integers(1, 12)):]
        elif kind == "insert":
            text = text[:pos] + draw(st.text(min_size=1, max_size=4)) + text[pos:]
        elif kind == "swap" and pos + 1 < len(text):
            text = text[:pos] + text[pos + 1] + text[pos] + text[pos + 2:]
        elif kind == "token":
            text = text[:pos] + draw(st.sampled_from(TOKENS)) + text[pos:]
        else:
            lines = text.split("\n")
            k = draw(st.integers(0, len(lines) - 1))
            if kind == "drop-line":
                del lines[k]
            else:
                lines.insert(k, lines[k])
            text = "\n".join(lines)
    return text


def _scan_text(tmp_path, text: str) -> None:
    path = tmp_path / "fuzz.sp"
    path.write_bytes(text.encode("utf-8", "replace"))
    try:
        with hang_guard(HANG_S):
            run = scan(ScanRequest(str(path)))
    except TauscanError:
        return
    data = json.loads(scan_json.render([run]))
    for cap in data["capacitors"]:
        for value in cap.values():
            assert not (isinstance(value, float) and not math.isfinite(value))


@settings(max_examples=examples(40), deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow])
@given(mutated())
def test_mutated_samples(tmp_path, text):
    _scan_text(tmp_path, text)


@st.composite
def grammar_shaped(draw):
    nodes = ["0", "a", "b", "c", "vdd"]
    lines = ["random netlist", ".model mn nmos (vto=0.5 kp=100u tox=10n cgdo=0.3n)", ".model qn npn (is=1e-16 bf=100 cjc=0.2p)",
             ".model dm d (is=1e-14 cjo=1p)", "Vdd vdd 0 dc 1.8", "Vin a 0 dc 0.7 ac 1"]
    value = st.sampled_from(["1k", "10k", "1p", "10f", "{2*1k}", "'1e3'", "0.5", "100meg", "1u"])
    for k in range(draw(st.integers(1, 10))):
        letter = draw(st.sampled_from("rcmqdlgei"))
        n = [draw(st.sampled_from(nodes)) for _ in range(4)]
        if letter in "rcl":
            lines.append(f"{letter}{k} {n[0]} {n[1]} {draw(value)}")
        elif letter == "m":
            lines.append(f"m{k} {n[0]} {n[1]} {n[2]} 0 mn w=1u l=1u")
        elif letter == "q":
            lines.append(f"q{k} {n[0]} {n[1]} {n[2]} qn")
        elif letter == "d":
            lines.append(f"d{k} {n[0]} {n[1]} dm")
        elif letter in "ge":
            lines.append(f"{letter}{k} {n[0]} {n[1]} {n[2]} {n[3]} {draw(st.sampled_from(['-10', '2m', '0.5']))}")
        else:
            lines.append(f"i{k} {n[0]} {n[1]} {draw(st.sampled_from(['1u', '10u']))}")
    return "\n".join(lines) + "\n"


@settings(max_examples=examples(40), deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow])
@given(grammar_shaped())
def test_grammar_shaped_netlists(tmp_path, text):
    _scan_text(tmp_path, text)
