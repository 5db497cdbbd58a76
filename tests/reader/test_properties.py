"""Property tests (hypothesis): generated netlists round-trip through ``expand``
with identical values, and random bytes only ever raise our error family."""

import json
from decimal import Decimal

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from tauscan.errors import TauscanError
from tauscan.reader import read_netlist
from tauscan.report.expand_view import render_json

from tests.conftest import examples

# SPICE2 scale factors (Nagel 1975, recalled from memory) as decimal exponents
SUFFIX = {"": 0, "t": 12, "g": 9, "meg": 6, "k": 3, "m": -3, "u": -6, "n": -9, "p": -12, "f": -15}

mantissa = st.builds(
    lambda i, f: f"{i}.{f}" if f else str(i),
    st.integers(1, 999),
    st.sampled_from(["", "0", "5", "25", "125", "001"]),
)


@st.composite
def netlists(draw):
    count = draw(st.integers(1, 12))
    lines = ["generated netlist"]
    expected = {}
    nodes = ["0", "n1", "n2", "n3", "vdd"]
    for k in range(count):
        letter = draw(st.sampled_from("rcl"))
        m = draw(mantissa)
        suffix = draw(st.sampled_from(sorted(SUFFIX)))
        case = draw(st.sampled_from([str.lower, str.upper]))
        unit = draw(st.sampled_from(["", "ohm" if letter == "r" else "F" if letter == "c" else "H"]))
        if letter == "c" and unit == "F" and suffix == "":
            unit = ""  # a bare 'F' would be femto
        a, b = draw(st.sampled_from(nodes)), draw(st.sampled_from(nodes))
        name = f"{letter}{k}"
        style = draw(st.sampled_from(["plain", "param", "braced"]))
        text = f"{m}{case(suffix)}{unit}"
        if style == "plain":
            lines.append(f"{name.upper()} {a} {b} {text}")
        elif style == "param":
            lines.append(f".param p{k}={m}{suffix}")
            lines.append(f"{name} {a} {b} p{k}")
        else:
            lines.append(f"{name} {a} {b} {{p{k}x*1}}")
            lines.append(f".param p{k}x = {m}{suffix}")
        expected[name] = float(Decimal(m) * Decimal(10) ** SUFFIX[suffix])
    return "\n".join(lines) + "\n", expected


@settings(max_examples=examples(150), deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(netlists())
def test_generated_netlists_round_trip_through_expand(write, case):
    text, expected = case
    data = json.loads(render_json(read_netlist(write(text))))
    got = {e["name"]: e["value"] for e in data["elements"]}
    for name, value in expected.items():
        # 'plain' and 'param' styles go through the suffix parser alone: identical floats
        # (Decimal gives the correctly rounded reference); braced ones also multiply by 1.
        assert got[name] == value, (name, text)


@settings(max_examples=examples(300), deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.binary(max_size=400))
def test_random_bytes_raise_only_our_errors(write, tmp_path, data):
    path = tmp_path / "random.sp"
    path.write_bytes(data)
    try:
        read_netlist(str(path))
    except TauscanError:
        pass


@settings(max_examples=examples(300), deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.text(alphabet=st.sampled_from(list("RCMXQVE .+*=(){}'\"abc01k\n;$ulp-")), max_size=200))
def test_random_card_text_raises_only_our_errors(tmp_path, text):
    path = tmp_path / "random.sp"
    path.write_text("title\n" + text)
    try:
        read_netlist(str(path))
    except TauscanError:
        pass
