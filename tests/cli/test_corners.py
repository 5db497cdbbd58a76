"""Corners (--corner) and worker processes (--jobs): several runs, one report, one exit code."""

import json
from pathlib import Path

from tests.conftest import SAMPLES, run_cli

SENSOR = str(SAMPLES / "sensor_readout.sp")
DRIVER = str(SAMPLES / "line_driver.sp")


def test_corners_override_parameters_and_temperature():
    result = run_cli("check", SENSOR, "--corner", "low:vdd=1.62", "--corner", "hot:temp=125", "--format", "json", "--jobs", "1")
    assert result.returncode == 0, result.stderr
    runs = json.loads(result.stdout)["runs"]
    assert [r["corner"] for r in runs] == ["low", "hot"]
    base = json.loads(run_cli("scan", SENSOR, "--format", "json").stdout)["summary"]["octc_hz"]
    low, hot = (r["summary"]["octc_hz"] for r in runs)
    assert low != base and hot != base and low != hot


def test_parallel_runs_give_identical_results():
    args = ["check", SENSOR, DRIVER, "--corner", "a:vdd=1.7", "--corner", "b:temp=85", "--format", "json"]
    one = run_cli(*args, "--jobs", "1")
    two = run_cli(*args, "--jobs", "2")
    assert one.returncode == two.returncode == 1  # the line driver has a miller-node finding
    assert json.loads(one.stdout) == json.loads(two.stdout)


def test_worst_corner_is_marked():
    result = run_cli("check", DRIVER, "--corner", "cold:temp=-40", "--corner", "hot:temp=125")
    lines = [l for l in result.stdout.splitlines() if "line_driver" in l and "(worst)" in l]
    assert len(lines) == 1


def test_bad_corner_and_bad_netlist_in_a_worker(tmp_path):
    result = run_cli("check", SENSOR, "--corner", "nocolon")
    assert result.returncode == 2 and "--corner expects NAME:PARAM=VALUE" in result.stderr
    bad = tmp_path / "bad.sp"
    bad.write_text("t\nR1 a b\n")
    result = run_cli("check", SENSOR, str(bad), "--jobs", "2")
    assert result.returncode == 2 and result.stderr.startswith(f"{bad}:2:")  # location survives the worker


def test_corners_from_the_settings_file(tmp_path):
    (tmp_path / "tauscan.toml").write_text("[corners]\nslow = { vdd = 1.62, temp = 125 }\nfast = { vdd = \"1.98\", temp = -40 }\n")
    path = tmp_path / "s.sp"
    path.write_text(Path(SENSOR).read_text())
    result = run_cli("check", str(path), "--format", "json", "--jobs", "1")
    assert result.returncode == 0, result.stderr
    assert [r["corner"] for r in json.loads(result.stdout)["runs"]] == ["slow", "fast"]
    (tmp_path / "tauscan.toml").write_text("[corners]\nslow = { vdd = \"fast\" }\n")
    result = run_cli("check", str(path))
    assert result.returncode == 2 and "must be a number" in result.stderr
