"""`tauscan check`: rules, settings, waivers from both places, exit codes, SARIF."""

import json
from pathlib import Path

from tests.conftest import SAMPLES, run_cli

# a common-source stage whose gate-drain capacitor is Miller-multiplied by about 40
MILLER = """miller-dominated stage
Vin src 0 dc 0 ac 1
Rs src g 50k
Gm d 0 g 0 4m
Rd d 0 10k
Cgd g d 20f ; a bridging capacitor
Cgs g 0 10f
Cd d 0 5f
"""


def write(tmp_path, name, text):
    path = tmp_path / name
    path.write_text(text)
    return str(path)


def test_miller_node_finding_and_exit_code(tmp_path):
    path = write(tmp_path, "a.sp", MILLER)
    result = run_cli("check", path, "--format", "json")
    assert result.returncode == 1, result.stderr
    data = json.loads(result.stdout)
    rules = [f["rule"] for f in data["findings"]]
    assert rules == ["miller-node"]
    f = data["findings"][0]
    assert f["file"] == path and f["line"] == 6 and f["severity"] == "warning"
    assert data["exit_code"] == 1


def test_fail_on_levels(tmp_path):
    path = write(tmp_path, "a.sp", MILLER)
    assert run_cli("check", path, "--fail-on", "error").returncode == 0
    assert run_cli("check", path, "--fail-on", "never").returncode == 0
    assert run_cli("check", path, "--fail-on", "note").returncode == 1


def test_inline_waiver_removes_the_miller_part(tmp_path):
    path = write(tmp_path, "a.sp", MILLER.replace("; a bridging capacitor", "; tauscan-waive: feedback capacitor by design"))
    result = run_cli("check", path, "--format", "json")
    assert result.returncode == 0, result.stdout
    data = json.loads(result.stdout)
    assert data["findings"] == []
    waivers = data["runs"][0]["waivers"]
    assert waivers == [{"capacitor": "cgd", "reason": "feedback capacitor by design", "source": f"netlist {path}:6"}]


def test_settings_waiver_threshold_and_discovery(tmp_path):
    (tmp_path / "pyproject.toml").write_text(
        '[project]\nname = "x"\n[tool.tauscan]\nmin-bandwidth = "1g"\nfail-on = "error"\n'
        '[tool.tauscan.waive]\n"cg*" = "reviewed: input capacitors"\n'
    )
    sub = tmp_path / "blocks"
    sub.mkdir()
    path = write(sub, "a.sp", MILLER)
    result = run_cli("check", path, "--format", "json")
    data = json.loads(result.stdout)
    assert [f["rule"] for f in data["findings"]] == ["bandwidth-floor"]
    assert result.returncode == 1  # bandwidth-floor is an error
    assert {w["capacitor"] for w in data["runs"][0]["waivers"]} == {"cgd", "cgs"}
    # the command line overrides the settings file
    assert run_cli("check", path, "--min-bandwidth", "1k").returncode == 0


def test_tauscan_toml_and_bad_settings(tmp_path):
    (tmp_path / "tauscan.toml").write_text('miller-threshold = 0.99\n')
    path = write(tmp_path, "a.sp", MILLER)
    assert run_cli("check", path).returncode == 0  # the gate node's Miller share is 96%, below 99%
    (tmp_path / "tauscan.toml").write_text('miller_share = 0.5\n')
    result = run_cli("check", path)
    assert result.returncode == 2 and "unknown setting 'miller_share'" in result.stderr
    assert f"{tmp_path / 'tauscan.toml'}:1" in result.stderr


def test_other_rules(tmp_path):
    regenerative = write(tmp_path, "r.sp", "t\nVin src 0 dc 0 ac 1\nRs src a 1k\nE1 x 0 a 0 3\nRo x b 100\nC1 a b 1p\nRl b 0 1meg\n")
    data = json.loads(run_cli("check", regenerative, "--format", "json").stdout)
    assert "regenerative-cap" in [f["rule"] for f in data["findings"]]
    floating = write(tmp_path, "f.sp", "t\nVin src 0 dc 1 ac 1\nR1 src a 1k\nC1 a f 1p\nC2 f 0 1p\nM1 a f 0 0 mn\n.model mn nmos vto=0.5 kp=100u\n")
    data = json.loads(run_cli("check", floating, "--format", "json").stdout)
    assert "floating-node" in [f["rule"] for f in data["findings"]]
    triode = write(tmp_path, "t.sp", "t\nVdd vdd 0 1.8\nVin g 0 dc 1.5 ac 1\nRd vdd d 100k\nCd d 0 10f\nM1 d g 0 0 mn w=10u l=1u\n"
                   ".model mn nmos (vto=0.5 kp=100u cgdo=1n)\n")
    data = json.loads(run_cli("check", triode, "--format", "json").stdout)
    f = [f for f in data["findings"] if f["rule"] == "bias-region"]
    assert f and f[0]["subject"] == "m1" and f[0]["line"] == 6


def test_many_netlists_one_report_one_exit_code(tmp_path):
    good = str(SAMPLES / "sensor_readout.sp")
    bad = write(tmp_path, "a.sp", MILLER)
    result = run_cli("check", good, bad, "--format", "json")
    data = json.loads(result.stdout)
    assert result.returncode == 1 and len(data["runs"]) == 2
    assert [r["netlist"] for r in data["runs"]] == [good, bad]
    table = run_cli("check", good, bad)
    assert "fail: 1 finding(s) in 2 netlist(s), exit code 1" in table.stdout


def test_bad_netlist_among_many_is_exit_2(tmp_path):
    bad = write(tmp_path, "bad.sp", "t\nR1 a b\n")
    result = run_cli("check", str(SAMPLES / "sensor_readout.sp"), bad)
    assert result.returncode == 2 and result.stderr.startswith(f"{bad}:2:")


def test_sarif_required_fields(tmp_path):
    path = write(tmp_path, "a.sp", MILLER)
    result = run_cli("check", path, "--format", "sarif", cwd=str(tmp_path))
    assert result.returncode == 1
    doc = json.loads(result.stdout)
    # SARIF 2.1.0 (OASIS): version, runs, each run's tool.driver.name; each result's message
    assert doc["version"] == "2.1.0" and doc["$schema"].endswith("sarif-2.1.0.json")
    run = doc["runs"][0]
    driver = run["tool"]["driver"]
    assert driver["name"] == "tauscan"
    ids = [r["id"] for r in driver["rules"]]
    assert {"miller-node", "bandwidth-floor", "regenerative-cap", "floating-node", "bias-region", "unstable-pole",
            "waiver-unused", "waiver-reason"} == set(ids)
    for rule in driver["rules"]:
        assert rule["shortDescription"]["text"] and rule["defaultConfiguration"]["level"] in ("error", "warning", "note")
    res = run["results"][0]
    assert res["ruleId"] == "miller-node" and ids[res["ruleIndex"]] == "miller-node"
    assert res["level"] == "warning" and res["message"]["text"]
    loc = res["locations"][0]["physicalLocation"]
    assert loc["artifactLocation"]["uri"] == "a.sp" and loc["region"]["startLine"] == 6
    assert run["artifacts"][0]["location"]["uri"] == "a.sp"


def test_samples_check_lists_the_waiver_in_use():
    result = run_cli("check", str(SAMPLES / "two_stage_amp.sp"))
    assert "Waivers in use" in result.stdout and "compensation capacitor" in result.stdout
    assert Path(SAMPLES / "two_stage_amp.sp").exists()
