"""The gate must never pass by accident: option values read strictly, the floor and the
margin shown, waivers that apply to nothing or give no reason reported, misspelt names
answered with the nearest one, and a broken netlist in a batch reported beside the others."""

from __future__ import annotations

import json

import pytest

from tests.conftest import SAMPLES, run_cli

SENSOR = str(SAMPLES / "sensor_readout.sp")
CASCODE = str(SAMPLES / "cascode_stage.sp")


def check_json(*args):
    out = run_cli("check", *args, "--format", "json")
    return out, (json.loads(out.stdout) if out.stdout.strip() else None)


@pytest.mark.parametrize("floor, fails", [
    ("20MHz", True), ("20 MHz", True), ("20meg", True), ("2e7", True), ("0.02GHz", True),
    ("10MHz", False), ("10meg", False), ("100mHz", False), ("100k", False),
])
def test_frequency_floor_spellings(floor, fails):
    """The sample's -3 dB point is 14.8 MHz (its golden report): 20 MHz fails, 10 MHz passes,
    whatever the spelling; 100 mHz is a tenth of a hertz."""
    out, data = check_json(SENSOR, "--min-bandwidth", floor)
    assert out.returncode == (1 if fails else 0), out.stderr
    floor_rec = data["runs"][0]["floor"]
    assert floor_rec["judged"] == "f3db"
    assert (floor_rec["margin"] < 0) == fails
    assert abs(floor_rec["judged_hz"] / floor_rec["floor_hz"] - 1 - floor_rec["margin"]) < 1e-12
    rules = {f["rule"] for f in data["findings"]}
    assert ("bandwidth-floor" in rules) == fails


@pytest.mark.parametrize("value, says", [
    ("10M", "ambiguous: SPICE reads M as milli, SI as mega; write 10meg or 10MHz for mega"),
    ("1x", "the suffix 'x' is not a scale"),
    ("50kk", "the suffix 'kk' is not a scale"),
    ("10 MHzz", "the suffix 'MHzz' is not a scale"),
    ("10 XHz", "'X' is not an SI prefix"),
])
def test_ambiguous_or_dropped_suffixes_are_refused(value, says):
    out = run_cli("check", SENSOR, "--min-bandwidth", value)
    assert out.returncode == 2 and says in out.stderr and "Traceback" not in out.stderr
    assert len(out.stderr.strip().splitlines()) == 1


def test_param_and_corner_values_are_read_strictly():
    out = run_cli("scan", SENSOR, "--param", "rload=1M")
    assert out.returncode == 2 and "ambiguous" in out.stderr and "1meg" in out.stderr
    out = run_cli("scan", SENSOR, "--corner", "slow:vdd=1.6x")
    assert out.returncode == 2 and "--corner slow" in out.stderr and "'x'" in out.stderr
    out = run_cli("scan", SENSOR, "--param", "rload=20kohm", "--format", "json")
    assert out.returncode == 0, out.stderr


def test_check_table_shows_floor_and_margin():
    out = run_cli("check", SENSOR, CASCODE, "--min-bandwidth", "20MHz")
    assert out.returncode == 1
    assert "floor" in out.stdout and "margin" in out.stdout
    assert "-26.0%" in out.stdout  # 14.8 MHz against 20 MHz


def test_unknown_parameter_names_the_nearest_one():
    out = run_cli("scan", SENSOR, "--param", "rlaod=10k")
    assert out.returncode == 2 and "did you mean 'rload'?" in out.stderr
    out = run_cli("scan", SENSOR, "--corner", "typo:vddd=1.5")
    assert out.returncode == 2 and "did you mean 'vdd'?" in out.stderr
    out = run_cli("scan", SENSOR, "--param", "nosuch=1")
    assert out.returncode == 2 and "its parameters: cpd, ln, rload, vdd, wn" in out.stderr


def test_corner_parameter_one_netlist_lacks_is_a_warning_there(tmp_path):
    """vdd is a .param of the sensor sample, not of the line driver: the batch runs, the
    driver's report says the override does not apply to it."""
    out, data = check_json(SENSOR, str(SAMPLES / "line_driver.sp"), "--corner", "low:vdd=1.6", "--fail-on", "never")
    assert out.returncode == 0, out.stderr
    driver = next(r for r in data["runs"] if r["netlist"].endswith("line_driver.sp"))
    assert any("parameter 'vdd' is not a .param" in w for w in driver["warnings"])


def test_misspelt_model_and_subcircuit(tmp_path):
    text = (SAMPLES / "two_stage_amp.sp").read_text()
    bad = tmp_path / "m.sp"
    bad.write_text(text.replace("M5 tail nb 0 0 nch", "M5 tail nb 0 0 nhc"))
    out = run_cli("scan", str(bad))
    assert out.returncode == 2 and "model 'nhc' is not defined (did you mean 'nch'?)" in out.stderr
    assert out.stderr.startswith(f"{bad}:")
    bad.write_text(text.replace("tail vdd pair\n", "tail vdd piar\n"))
    out = run_cli("scan", str(bad))
    assert out.returncode == 2 and "unknown subcircuit 'piar' (did you mean 'pair'?)" in out.stderr


def test_waivers_that_match_nothing_or_give_no_reason(tmp_path):
    text = (SAMPLES / "two_stage_amp.sp").read_text()
    text = text.replace("M6 out o1 vdd vdd pch w=80u l=1u ad=40p as=40p pd=82u ps=82u",
                        "M6 out o1 vdd vdd pch w=80u l=1u ad=40p as=40p pd=82u ps=82u ; tauscan-waive[cxx]: typo")
    text = text.replace("Rl out 0 12k", "Rl out 0 12k ; tauscan-waive: on a resistor")
    text = text.replace("Cl out 0 2p", "Cl out 0 2p ; tauscan-waive")
    path = tmp_path / "amp.sp"
    path.write_text(text)
    (tmp_path / "tauscan.toml").write_text('[waive]\n"xin.m9*" = "stale glob"\n"m6:cgd" = ""\n')
    out, data = check_json(str(path))
    assert out.returncode == 1
    found = {(f["rule"], f["subject"], f["line"]) for f in data["findings"]}
    lines = text.splitlines()
    m6 = next(k for k, ln in enumerate(lines, 1) if ln.startswith("M6 "))
    rl = next(k for k, ln in enumerate(lines, 1) if ln.startswith("Rl "))
    cl = next(k for k, ln in enumerate(lines, 1) if ln.startswith("Cl "))
    assert ("waiver-unused", "m6:cxx", m6) in found
    assert ("waiver-unused", "rl", rl) in found
    assert ("waiver-reason", "cl", cl) in found
    assert ("waiver-unused", "xin.m9*", 2) in found
    assert ("waiver-reason", "m6:cgd", 3) in found
    # a waiver without a reason is not applied; the one with a reason still is
    waived = {w["capacitor"] for w in data["runs"][0]["waivers"]}
    assert "cc" in waived and "cl" not in waived and "m6:cgd" not in waived


@pytest.mark.parametrize("jobs", ["1", "2"])
def test_broken_netlist_in_a_batch(tmp_path, jobs):
    bad = tmp_path / "broken.sp"
    bad.write_text("broken\nR1 a b\n")
    out_file = tmp_path / "report.sarif"
    out = run_cli("check", SENSOR, str(bad), CASCODE, "--format", "sarif", "-o", str(out_file), "--jobs", jobs)
    assert out.returncode == 2
    assert out.stderr.startswith(f"{bad}:2:")
    doc = json.loads(out_file.read_text())
    run = doc["runs"][0]
    invocation = run["invocations"][0]
    assert invocation["executionSuccessful"] is False
    note = invocation["toolExecutionNotifications"][0]
    assert note["level"] == "error" and "missing resistance value" in note["message"]["text"]
    assert note["locations"][0]["physicalLocation"]["region"]["startLine"] == 2
    # the good netlists still have their reports
    assert len(run["properties"]["analyses"]) == 2
    out, data = check_json(SENSOR, str(bad), "--jobs", jobs)
    assert out.returncode == 2 and len(data["runs"]) == 1
    assert data["errors"][0]["line"] == 2 and data["exit_code"] == 2


def test_sarif_uris_are_percent_encoded_and_findings_fingerprinted(tmp_path):
    folder = tmp_path / "with space"
    folder.mkdir()
    (folder / "a b.sp").write_text((SAMPLES / "two_stage_amp.sp").read_text())
    args = ("check", "with space/a b.sp", "--format", "sarif", "--min-bandwidth", "1meg")
    first = run_cli(*args, cwd=str(tmp_path))
    assert first.stdout.endswith("\n")
    doc = json.loads(first.stdout)
    run = doc["runs"][0]
    assert run["artifacts"][0]["location"]["uri"] == "with%20space/a%20b.sp"
    prints = [r["partialFingerprints"]["tauscanSubject/v1"] for r in run["results"]]
    assert prints and len(set(prints)) == len(prints)
    # the same finding keeps its fingerprint when the netlist's lines move
    text = (folder / "a b.sp").read_text()
    (folder / "a b.sp").write_text(text.replace("\n.param", "\n* a new comment line\n.param", 1))
    again = json.loads(run_cli(*args, cwd=str(tmp_path)).stdout)["runs"][0]["results"]
    assert [r["partialFingerprints"]["tauscanSubject/v1"] for r in again] == prints


def test_models_without_capacitance_parameters_are_warned(tmp_path):
    path = tmp_path / "bare.sp"
    path.write_text("no caps\n.model bare nmos level=1 vto=0.5 kp=100u\nVdd vdd 0 1.8\nVin g 0 dc 0.8 ac 1\n"
                    "M1 d g 0 0 bare w=1u l=1u\nM2 d2 g 0 0 bare w=1u l=1u\nRl vdd d 10k\nRl2 vdd d2 10k\n"
                    "Cl d 0 10f\n.end\n")
    out = run_cli("scan", str(path), "--format", "json")
    warnings = [w for w in json.loads(out.stdout)["warnings"] if "no capacitance parameters" in w]
    assert len(warnings) == 1 and "model bare" in warnings[0] and "2 devices" in warnings[0]


def test_help_explains_format_and_corner_lib():
    text = " ".join(run_cli("scan", "--help").stdout.split())  # argparse wraps at the terminal width
    assert "markdown (for a review)" in text and "lib=SECTION" in text


def test_every_report_names_its_corner(tmp_path):
    corners = ("--corner", "slow:vdd=1.6", "--corner", "fast:vdd=2.0")
    table = run_cli("scan", SENSOR, *corners).stdout
    assert "corner slow" in table and "corner fast" in table
    csv_text = run_cli("scan", SENSOR, *corners, "--format", "csv").stdout
    assert csv_text.splitlines()[0].startswith("netlist,corner,name")
    assert {line.split(",")[1] for line in csv_text.splitlines()[1:]} == {"slow", "fast"}
    out, data = check_json(SENSOR, *corners, "--min-bandwidth", "20MHz")
    assert [f["corner"] for f in data["findings"]] == ["slow", "fast"]
    doc = json.loads(run_cli("check", SENSOR, *corners, "--min-bandwidth", "20MHz", "--format", "sarif").stdout)
    run = doc["runs"][0]
    assert [a["corner"] for a in run["properties"]["analyses"]] == ["slow", "fast"]
    assert [r["message"]["text"].endswith(f"[corner {c}]") for r, c in zip(run["results"], ("slow", "fast"))] == [True, True]
    fps = {r["partialFingerprints"]["tauscanSubject/v1"] for r in run["results"]}
    assert len(fps) == 2  # the same finding at two corners is two results
    check = run_cli("check", SENSOR, *corners, "--min-bandwidth", "20MHz").stdout
    assert "corner" in check.split("Findings")[1].splitlines()[2]


def test_settings_corners_run_beside_the_nominal_case(tmp_path):
    (tmp_path / "tauscan.toml").write_text("[corners]\nlow = { vdd = 1.6 }\n")
    path = tmp_path / "s.sp"
    path.write_text((SAMPLES / "sensor_readout.sp").read_text())
    out = run_cli("check", str(path))
    assert "nominal" in out.stdout and "low" in out.stdout


def test_op_report_gives_vth_vdsat_margin_and_gm_over_id():
    """Level 1 in saturation: id = K vov^2 (1 + lambda vds), so gm / id = 2 / vov exactly
    (the square law, Shichman and Hodges 1968), and vdsat = vov."""
    out = run_cli("op", str(CASCODE), "--format", "json")
    devices = {d["name"]: d for d in json.loads(out.stdout)["devices"]}
    m1 = devices["m1"]
    assert m1["region"] == "saturation"
    assert abs(m1["gm_id"] * m1["vov"] - 2.0) < 1e-6
    assert m1["vdsat"] == m1["vov"] and abs(m1["margin"] - (m1["vds"] - m1["vdsat"])) < 1e-12
    assert abs(m1["vgs"] - m1["vth"] - m1["vov"]) < 1e-9
    q = {d["name"]: d for d in json.loads(run_cli("op", str(SAMPLES / "line_driver.sp"), "--format", "json").stdout)["devices"]}["q1"]
    assert abs(q["ic_ib"] - q["id"] / q["ib"]) < 1e-9 * q["ic_ib"]
    table = run_cli("op", str(CASCODE)).stdout
    assert "gm/id=" in table and "margin=" in table
    # one quantity per line: a value never splits from its unit
    for line in table.splitlines():
        assert not line.rstrip().endswith(("=", " fF", "│ fF"))


PROBE_FLIP = """two outputs whose larger response depends on a parameter (our own)
.param ga=2 gb=1
vin in 0 dc 0 ac 1
ea a 0 in 0 {ga}
ra a outa 1k
ca outa 0 1p
eb b 0 in 0 {gb}
rb b outb 1k
cb outb 0 2p
"""


def test_a_corner_does_not_change_the_probe(tmp_path):
    path = tmp_path / "flip.sp"
    path.write_text(PROBE_FLIP)
    alone = json.loads(run_cli("scan", str(path), "--corner", "two:ga=1,gb=3", "--format", "json").stdout)
    assert alone["probe"] == "b"  # alone, that corner would choose the other output
    both = json.loads(run_cli("scan", str(path), "--corner", "one:ga=2,gb=1", "--corner", "two:ga=1,gb=3",
                              "--format", "json").stdout)
    assert [(r["corner"], r["probe"]) for r in both["runs"]] == [("one", "a"), ("two", "a")]
    assert "kept for every corner" in both["runs"][1]["probe_reason"]
