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
    # the nominal case runs beside the corners of the settings file
    assert [r["corner"] for r in json.loads(result.stdout)["runs"]] == [None, "slow", "fast"]
    (tmp_path / "tauscan.toml").write_text("[corners]\nslow = { vdd = \"fast\" }\n")
    result = run_cli("check", str(path))
    assert result.returncode == 2 and "is not a number" in result.stderr


MODELS_LIB = """* process library with nested sections (invented values)
.lib tt
.lib 'models.lib' mos_tt
.endl tt
.lib ss
.lib 'models.lib' mos_ss
.endl ss
.lib mos_tt
.model nch nmos (vto=0.45 kp=200u lambda=0.05 cgdo=0.3n cgso=0.3n tox=8n)
.endl mos_tt
.lib mos_ss
.model nch nmos (vto=0.55 kp=150u lambda=0.05 cgdo=0.3n cgso=0.3n tox=8n)
.endl mos_ss
"""


def _lib_netlist(tmp_path, section="tt"):
    (tmp_path / "models.lib").write_text(MODELS_LIB)
    net = tmp_path / f"amp_{section}.sp"
    net.write_text(f"cs stage\n.lib 'models.lib' {section}\nVdd vdd 0 1.8\nVin g 0 dc 0.9 ac 1\nRd vdd d 5k\n"
                   "M1 d g 0 0 nch w=10u l=1u\nCl d 0 100f\n")
    return str(net)


def test_a_corner_selects_a_lib_section(tmp_path):
    base = _lib_netlist(tmp_path)
    direct = json.loads(run_cli("scan", _lib_netlist(tmp_path, "ss"), "--format", "json").stdout)
    result = run_cli("scan", base, "--corner", "typ:lib=tt", "--corner", "slow:lib=ss,temp=27",
                     "--format", "json", "--jobs", "1")
    assert result.returncode == 0, result.stderr
    runs = {r["corner"]: r for r in json.loads(result.stdout)["runs"]}
    # the corner reads section ss exactly as a netlist naming ss itself does
    assert runs["slow"]["summary"]["octc_hz"] == direct["summary"]["octc_hz"]
    assert runs["typ"]["summary"]["octc_hz"] != runs["slow"]["summary"]["octc_hz"]


def test_lib_corners_from_the_settings_file(tmp_path):
    base = _lib_netlist(tmp_path)
    (tmp_path / "tauscan.toml").write_text('[corners]\nslow = { lib = "ss", temp = 100 }\nfast = { lib = "tt" }\n')
    result = run_cli("check", base, "--format", "json", "--jobs", "1")
    assert result.returncode in (0, 1), result.stderr
    # the nominal case runs beside the corners of the settings file
    assert [r["corner"] for r in json.loads(result.stdout)["runs"]] == [None, "slow", "fast"]


def test_lib_corner_errors(tmp_path):
    base = _lib_netlist(tmp_path)
    missing = run_cli("scan", base, "--corner", "x:lib=ff")
    assert missing.returncode == 2
    assert "section 'ff'" in missing.stderr and "Traceback" not in missing.stderr
    plain = tmp_path / "plain.sp"
    plain.write_text("rc\nVin a 0 dc 0 ac 1\nR1 a b 1k\nC1 b 0 1p\n")
    nolib = run_cli("scan", str(plain), "--corner", "x:lib=ss")
    assert nolib.returncode == 2 and "no '.lib FILE SECTION' card" in nolib.stderr
    bad = run_cli("scan", base, "--corner", "x:lib=1bad")
    assert bad.returncode == 2 and "not a .lib section name" in bad.stderr


def test_scan_takes_several_netlists_and_corners():
    result = run_cli("scan", SENSOR, DRIVER, "--corner", "a:temp=0", "--corner", "b:temp=85", "--format", "json",
                     "--jobs", "2")
    assert result.returncode == 0, result.stderr
    runs = json.loads(result.stdout)["runs"]
    assert [(Path(r["netlist"]).name, r["corner"]) for r in runs] == [
        ("sensor_readout.sp", "a"), ("sensor_readout.sp", "b"), ("line_driver.sp", "a"), ("line_driver.sp", "b")]
    table = run_cli("scan", SENSOR, DRIVER, "--top", "3")
    assert table.returncode == 0 and "sensor_readout.sp" in table.stdout and "line_driver.sp" in table.stdout


def test_a_worker_run_carries_the_plots_sweep():
    """A scan run in a worker process (--jobs with several corners) comes back with the
    response sweep the request asked for: --plot used to draw no curve then.  The sweep's
    -3 dB crossing must agree with the run's own -3 dB figure (|H| / |H(0)| = 1/sqrt 2)."""
    import pickle

    import numpy as np

    from tauscan.pipeline import ScanRequest, scan_in_worker

    run = pickle.loads(pickle.dumps(scan_in_worker(ScanRequest(str(SAMPLES / "two_stage_amp.sp"), curve_points=400))))
    assert run.circuit is None and run.op is None
    freqs, mags = run.response_curve()
    assert len(freqs) == 400 and np.all(np.diff(freqs) > 0)
    below = mags / abs(run.analysis.dc_gain) < 2 ** -0.5  # the gain is signed
    crossing = freqs[np.argmax(below)]
    assert run.analysis.f3db_hz <= crossing <= run.analysis.f3db_hz * (freqs[1] / freqs[0]) ** 1.01
