"""The terminal table at 80, 120 and 160 columns with long hierarchical names (a netlist of
our own), ``--columns``, and names elided in the middle."""

from __future__ import annotations

import re

import pytest

from tauscan.pipeline import ScanRequest, scan
from tauscan.report import scan_table
from tauscan.report.scan_table import elide_middle
from tauscan.units import eng
from tests.conftest import run_cli

DEEP = """* a gain stage four levels down (our own)
.model nm nmos level=1 vto=0.5 kp=200u lambda=0.05 cgso=0.3n cgdo=0.3n cgbo=0.1n tox=10n
.subckt amplifier_core_stage in out vdd
m_input_transistor_7 out in 0 0 nm w=10u l=0.5u
r_load_resistor out vdd 20k
c_parasitic_wiring out 0 50f
.ends
.subckt level_three_block in out vdd
x_core_instance_name in out vdd amplifier_core_stage
.ends
.subckt level_two_block in out vdd
x_level_three_instance in out vdd level_three_block
.ends
.subckt level_one_block in out vdd
x_level_two_instance in out vdd level_two_block
.ends
vdd vdd 0 1.8
vin in 0 dc 0.8 ac 1
rs in g 10k
x_top_level_instance_long_name g out vdd level_one_block
cl out 0 20f
"""


def test_elide_middle():
    assert elide_middle("x1.x2.x3.x4.m7:cgd", 14) == "x1.x2...m7:cgd"  # the form the issue asks for
    assert elide_middle("short:cgd", 14) == "short:cgd"
    long = "x_top_level_instance_long_name.x_level_two_instance.m_input_transistor_7:cgd"
    for limit in (12, 20, 40, 60):
        shown = elide_middle(long, limit)
        assert len(shown) <= limit and "..." in shown and shown.endswith(":cgd")


@pytest.fixture(scope="module")
def deep_run(tmp_path_factory):
    path = tmp_path_factory.mktemp("deep") / "deep.sp"
    path.write_text(DEEP)
    return scan(ScanRequest(str(path)))


def _capacitor_table(text: str) -> list[str]:
    lines = text.splitlines()
    start = next(i for i, line in enumerate(lines) if line.startswith("Capacitors on the signal path"))
    end = next(i for i in range(start + 1, len(lines)) if lines[i].strip().startswith("╵"))
    return lines[start:end + 1]


@pytest.mark.parametrize("width", [80, 120, 160])
def test_table_fits_the_width_and_keeps_the_essential_columns(deep_run, width):
    text = scan_table.render([deep_run], 20, width=width)
    assert max(map(len, text.splitlines())) <= width
    table = _capacitor_table(text)
    header = next(line for line in table if "capacitor" in line)
    cells = [c.strip() for c in header.split("│")]
    for essential in ("capacitor", "nodes", "C", "gain", "class", "T", "T share"):
        assert essential in cells, (width, cells)
    caps = deep_run.analysis.on_path_capacitors
    body = "\n".join(table)
    for c in caps:
        assert eng(c.farads, "F") in body  # the number and its unit on one line, together
        assert eng(c.transfer_tau_s, "s") in body
    names = [row.split("│")[cells.index("capacitor")].strip() for row in table if ":cg" in row]
    assert len(names) == len(caps) and all(n.endswith((":cgd", ":cgs", ":cgb")) for n in names)
    if width < 160:
        assert all("..." in n for n in names)  # elided in the middle, the device part kept
    assert not re.search(r"…", body)  # never cut at the end by the terminal


def test_columns_option_picks_the_columns(tmp_path):
    path = tmp_path / "deep.sp"
    path.write_text(DEEP)
    out = run_cli("scan", str(path), "--columns", "capacitor,c,t,f-without", "-o", str(tmp_path / "r.txt"))
    assert out.returncode == 0, out.stderr
    table = _capacitor_table((tmp_path / "r.txt").read_text())
    header = [c.strip() for c in next(line for line in table if "capacitor" in line).split("│")]
    assert header == ["#", "capacitor", "C", "T", "f w/o it"]
    bad = run_cli("scan", str(path), "--columns", "capacitor,shar")
    assert bad.returncode == 2 and "did you mean 'share'" in bad.stderr and "Traceback" not in bad.stderr
