"""Simulator dialects seen in netlists written by others, each on a line of our own."""

from __future__ import annotations

import pytest

from tauscan.errors import IncludeError
from tauscan.reader import ReadOptions, read_netlist
from tests.conftest import run_cli


def _source(write, line: str, params: str = ""):
    c = read_netlist(write(f"t\n{params}{line}\nR1 a 0 1k\n"))
    return c.element("v1").source


@pytest.mark.parametrize("line, dc, mag, phase", [
    ("V1 a 0 AC=0.5 90", 0.0, 0.5, 90.0),
    ("V1 a 0 AC=1,0", 0.0, 1.0, 0.0),
    ("V1 a 0 ac=1", 0.0, 1.0, 0.0),
    ("V1 a 0 DC=VCM AC=Vid/2 180", 0.9, 0.1, 180.0),
    ("V1 a 0 dc 1.2 ac 1 45", 1.2, 1.0, 45.0),
    ("V1 a 0 0.7 AC 2", 0.7, 2.0, 0.0),
    ("V1 a 0 ac", 0.0, 1.0, 0.0),
])
def test_source_values(write, line, dc, mag, phase):
    # before: 'AC=0.5 90' dropped the AC part and read 90 as the DC value (a 90 V source)
    spec = _source(write, line, ".param vcm=0.9 vid=0.2\n")
    assert (spec.dc, spec.ac_mag, spec.ac_phase) == pytest.approx((dc, mag, phase))


@pytest.mark.parametrize("line, kind, args", [
    ("V1 a 0 SIN 0 1 1k", "sin", (0.0, 1.0, 1e3)),
    ("V1 a 0 PULSE 0 1.8 0 1n 1n 5n 10n", "pulse", (0.0, 1.8, 0.0, 1e-9, 1e-9, 5e-9, 1e-8)),
    ("V1 a 0 PWL 0 0 1n 1.8", "pwl", (0.0, 0.0, 1e-9, 1.8)),
    ("V1 a 0 dc 0.5 ac 1 sin(0.5 1 1meg)", "sin", (0.5, 1.0, 1e6)),
])
def test_transient_functions_with_or_without_parentheses(write, line, kind, args):
    spec = _source(write, line)
    assert spec.waveform.kind == kind and spec.waveform.args == pytest.approx(args)


def test_output_and_measurement_cards_are_skipped(write):
    c = read_netlist(write("t\nV1 a 0 1\nR1 a b 1k\nR2 b 0 1k\n"
                           ".meas tran t1 when v(a,b)=0\n"
                           ".measure ac gain max vdb(b) from=1 to=1meg\n"
                           ".probe v(a) i(r1) {v(a)-v(b)}\n"
                           ".print ac vdb(b) v(a,b)\n"))
    assert [e.name for e in c.elements] == ["v1", "r1", "r2"]
    assert not c.warnings


def test_alter_ends_the_reading_with_a_warning(write):
    c = read_netlist(write("t\nV1 a 0 1\nR1 a 0 1k\n.alter\nR1 a 0 2k\n.alter second\nR9 a 0 5\n"))
    assert c.element("r1").value == 1e3 and [e.name for e in c.elements] == ["v1", "r1"]
    said = [w for w in c.warnings if "'.alter'" in w]
    assert len(said) == 1 and said[0].split(":")[1] == "4"


def test_title_temp_and_option_lists(write):
    c = read_netlist(write("first line\n.title a stage of our own\n.temp=85\n"
                           ".options reltol=1e-3 abstol=1e-12, gmin=1e-12 method=gear post\n"
                           ".option scale=1\nV1 a 0 1\nR1 a 0 1k\n"))
    assert c.title == "a stage of our own"
    assert c.temp_c == 85.0
    assert c.options["reltol"] == 1e-3 and c.options["gmin"] == 1e-12
    assert c.options["method"] == "gear" and c.options["post"] == "on"


def test_temp_without_equals(write):
    assert read_netlist(write("t\n.temp 125\nV1 a 0 1\nR1 a 0 1k\n")).temp_c == 125.0


def test_unknown_suffix_letters_are_warned(write):
    path = write("t\nV1 a 0 1\nR1 a b 100x\nR2 b 0 1k\nC1 b 0 2pF\nR3 b 0 10ohm\nV2 c 0 5V\nR4 c 0 1meg\n")
    c = read_netlist(path)
    said = [w for w in c.warnings if "not a scale suffix" in w]
    # only 100x: pF, ohm, V and meg are a suffix with a unit, a unit, or a suffix (SPICE2)
    assert len(said) == 1 and said[0].startswith(f"{path}:3:8: '100x' is read as 100") and "--x-mega" in said[0]
    assert c.element("r1").value == 100.0


def test_x_as_mega_behind_a_setting(write):
    path = write("t\nV1 a 0 1\nR1 a b 100x\nR2 b 0 {2.5x}\n")
    c = read_netlist(path, options=ReadOptions(x_mega=True))
    assert c.element("r1").value == pytest.approx(1e8)
    assert not [w for w in c.warnings if "scale suffix" in w]
    # the same through the settings file
    with open(str(path).rsplit("/", 1)[0] + "/tauscan.toml", "w") as handle:
        handle.write("x-mega = true\n")
    result = run_cli("expand", path, "--format", "json")
    assert result.returncode == 0 and '"value": 100000000.0' in result.stdout


def test_include_search_path(write, tmp_path):
    (tmp_path / "models").mkdir()
    (tmp_path / "models" / "extra.inc").write_text("R9 b 0 1k\n")
    path = write("t\nV1 a 0 1\nR1 a b 1k\n.include extra.inc\n", "bench/top.sp")
    with pytest.raises(IncludeError, match="add its folder with -I DIR") as info:
        read_netlist(path)
    assert info.value.line == 4
    c = read_netlist(path, options=ReadOptions(include_dirs=(str(tmp_path / "models"),)))
    assert c.element("r9").value == 1e3
    result = run_cli("expand", path, "-I", str(tmp_path / "nothing"), "-I", str(tmp_path / "models"))
    assert result.returncode == 0 and "r9" in result.stdout
    (tmp_path / "bench" / "tauscan.toml").write_text('include-dirs = ["../models"]\n')
    result = run_cli("scan", path, "--format", "json")
    assert result.returncode == 0, result.stderr


def test_windows_paths_are_read_and_reported_as_written(write, tmp_path):
    (tmp_path / "models").mkdir()
    (tmp_path / "models" / "n.lib").write_text(".lib tt\nR9 b 0 1k\n.endl\n")
    c = read_netlist(write("t\nV1 a b 1\nR1 a 0 1k\n.lib 'models\\n.lib' tt\n"))
    assert c.element("r9").value == 1e3  # back slashes as folder separators
    with pytest.raises(IncludeError) as info:
        read_netlist(write("t\nV1 a 0 1\n.lib \"C:\\pdk\\models\\n.lib\" tt\n", "w.sp"))
    assert "'C:\\\\pdk\\\\models\\\\n.lib'" in info.value.message and "Windows path" in info.value.message
