"""The band, state, source and probe options end to end (the real entry point), checked
against closed forms of the textbook treatment of a common-emitter stage (Sedra and Smith,
"Microelectronic Circuits", frequency-response chapter; Gray, Hurst, Lewis and Meyer, 5th
ed., ch. 7) and of single-pole networks (v = -gm R v_in, p = -1 / (R C))."""

from __future__ import annotations

import json
import math

import pytest
from numpy.testing import assert_allclose

from tests.analysis.test_midband import CE, CE_NETLIST, par
from tests.conftest import SAMPLES, run_cli


def scan_json(path, *args):
    out = run_cli("scan", str(path), "--format", "json", *args)
    assert out.returncode == 0, out.stderr
    data = json.loads(out.stdout)
    return data[0] if isinstance(data, list) else data


@pytest.fixture
def ce(tmp_path):
    path = tmp_path / "ce.sp"
    path.write_text(CE_NETLIST.format(**CE))
    return path


K = CE
BETA = K["gm"] * K["rpi"]
RL_AC = par(K["rc"], K["rl"])


def cap(data, name):
    return next(c for c in data["capacitors"] if c["name"] == name)


def test_band_auto_reports_states_reasons_and_low_band(ce):
    data = scan_json(ce, "--probe", "out")
    band = data["band"]
    assert band["mode"] == "auto"
    assert band["states"] == {"c1": "short", "ce": "short", "c2": "short"}
    assert set(band["reasons"]) == {"c1", "ce", "c2"}
    assert band["f_low_hz"] < band["f_mid_hz"] < band["f_high_hz"]
    assert_allclose(band["f_mid_hz"], math.sqrt(band["f_low_hz"] * band["f_high_hz"]), rtol=1e-9)
    assert {e["name"] for e in band["low_band"]} == {"c1", "ce", "c2"}
    assert data["summary"]["dc_gain"] < 0  # signed: the stage inverts
    assert data["drive_unit"] == "per volt of vsig"


def test_band_dc_is_the_dc_circuit(ce):
    data = scan_json(ce, "--probe", "out", "--band", "dc")
    assert data["band"]["mode"] == "dc" and data["band"]["states"] == {}
    # coupling capacitors open: no low-frequency transfer at all
    assert data["summary"]["dc_gain"] == 0.0
    # bypass open: the degenerated gain across C_mu, -gm RC / (1 + gm RE (1 + 1/beta))
    assert_allclose(cap(data, "cmu")["gain"], -K["gm"] * K["rc"] / (1 + K["gm"] * K["re"] * (1 + 1 / BETA)), rtol=1e-5)


def test_band_at_a_fixed_frequency_between_the_corners(ce):
    """At 10 Hz the coupling capacitors are shorts and the bypass capacitor is not: C1 then
    sees R_sig + RB || (r_pi + (beta + 1) RE), corner 0.46 Hz; CE sees 33 ohm, corner 48 Hz."""
    data = scan_json(ce, "--probe", "out", "--band", "10")
    band = data["band"]
    assert band["mode"] == "fixed" and band["f_mid_hz"] == 10.0
    assert band["states"] == {"c1": "short", "c2": "short"}
    low = {e["name"]: e for e in band["low_band"]}
    assert_allclose(low["c1"]["ohms"], K["rsig"] + par(K["rb"], K["rpi"] + (BETA + 1) * K["re"]), rtol=1e-6)
    assert_allclose(cap(data, "cmu")["gain"], -K["gm"] * RL_AC / (1 + K["gm"] * K["re"] * (1 + 1 / BETA)), rtol=1e-5)
    # well above every low corner: the full mid-band circuit
    data = scan_json(ce, "--probe", "out", "--band", "10k")
    assert data["band"]["states"] == {"c1": "short", "ce": "short", "c2": "short"}
    assert_allclose(cap(data, "cmu")["gain"], -K["gm"] * RL_AC, rtol=1e-6)


def test_pinned_states_on_the_command_line_and_in_the_settings(ce, tmp_path):
    data = scan_json(ce, "--probe", "out", "--open", "ce")
    assert data["band"]["states"] == {"c1": "short", "c2": "short"}
    assert "pinned open" in data["band"]["reasons"]["ce"]
    data = scan_json(ce, "--probe", "out", "--band", "dc", "--short", "c[e]")
    assert data["band"]["states"] == {"ce": "short"}
    assert_allclose(cap(data, "cmu")["gain"], -K["gm"] * K["rc"], rtol=1e-6)
    settings = tmp_path / "tauscan.toml"
    settings.write_text('band = "10"\n[states]\n"c2" = "open"\n')
    data = scan_json(ce, "--probe", "out", "--config", str(settings))
    assert data["band"]["mode"] == "fixed"
    assert data["band"]["states"] == {"c1": "short"}


@pytest.mark.parametrize("args, message", [
    (("--short", "nosuch*"), "--short 'nosuch*' matches no capacitor or inductor"),
    (("--band", "0"), "band takes auto, dc or a positive frequency"),
    (("--band", "fast"), "band takes auto, dc or a positive frequency"),
    (("--rank", "size"), "invalid choice"),
])
def test_bad_band_options_exit_2(ce, args, message):
    out = run_cli("scan", str(ce), *args)
    assert out.returncode == 2
    assert message in out.stderr
    assert "Traceback" not in out.stderr


def test_differential_drive_is_one_excitation_per_volt_of_difference(tmp_path):
    """ac 0.5 / ac 0.5 180 is a 1 V differential drive: v_out = -gm R_o (v_p - v_n)."""
    path = tmp_path / "d.sp"
    path.write_text("differential transconductor\nVa inp 0 dc 0 ac 0.5\nVb inn 0 dc 0 ac 0.5 180\n"
                    "G1 out 0 inp inn 1m\nRo out 0 10k\nCo out 0 1p\n.end\n")
    data = scan_json(path)
    assert data["source"] == "va,vb" and data["probe"] == "out"
    assert_allclose(data["summary"]["dc_gain"], -10.0, rtol=1e-6)
    # one pole, 1 / (2 pi R_o C_o)
    assert_allclose(data["summary"]["f3db_hz"], 1 / (2 * math.pi * 10e3 * 1e-12), rtol=1e-6)
    assert_allclose(data["summary"]["elmore_hz"], 1 / (2 * math.pi * 10e3 * 1e-12), rtol=1e-6)
    one = scan_json(path, "--source", "va")
    assert one["source"] == "va"
    assert_allclose(one["summary"]["dc_gain"], -10.0, rtol=1e-6)


def test_small_ac_value_does_not_scale_the_gain_and_a_differential_probe(tmp_path):
    path = tmp_path / "m.sp"
    path.write_text("single-ended, small AC value\nVin in 0 dc 0 ac 1m\nRs in g 1k\n"
                    "G1 outp 0 g 0 1m\nG2 outn 0 g 0 -1m\nRp outp 0 10k\nRn outn 0 10k\n"
                    "Cp outp 0 1p\nCn outn 0 2p\n.end\n")
    data = scan_json(path, "--probe", "outp")
    assert_allclose(data["summary"]["dc_gain"], -10.0, rtol=1e-6)
    assert data["drive_unit"] == "per volt of vin"
    data = scan_json(path, "--probe", "outp,outn")
    assert data["probe"] == "outp,outn"
    assert_allclose(data["summary"]["dc_gain"], -20.0, rtol=1e-6)
    # v(outp) - v(outn) = -10 / (1 + s Rp Cp) - 10 / (1 + s Rn Cn): first moment
    # (10 * 10 ns + 10 * 20 ns) / 20 = 15 ns
    assert_allclose(data["summary"]["sum_transfer_tau_s"], 15e-9, rtol=1e-6)


def test_dominant_pole_is_the_transfers_not_the_slowest(tmp_path):
    """An undriven 1 Meg / 10 p section has the slowest pole (15.9 kHz); the transfer only
    sees the 1 k / 1 p one (159 MHz)."""
    path = tmp_path / "i.sp"
    path.write_text("driven and undriven sections\nVin in 0 dc 0 ac 1\nR1 in out 1k\nC1 out 0 1p\n"
                    "Vb b 0 dc 1\nR2 b x 1Meg\nC2 x 0 10p\n.end\n")
    data = scan_json(path)
    hz = sorted(p["hz"] for p in data["poles"])
    assert_allclose(hz[0], 1 / (2 * math.pi * 1e6 * 10e-12), rtol=1e-6)
    assert_allclose(data["summary"]["dominant_pole_hz"], 1 / (2 * math.pi * 1e3 * 1e-12), rtol=1e-6)
    c2 = cap(data, "c2")
    assert c2["on_signal_path"] is False and c2["transfer_tau_s"] == 0.0
    assert data["capacitors"][-1]["name"] == "c2"  # ranked after the signal path


def test_right_half_plane_pole_is_an_error_finding_not_a_dominant_pole(tmp_path):
    """A node with net negative conductance (1 k, 1 k and -3 mS): one pole at
    s = +1 mS / 1 pF = +1e9 /s."""
    path = tmp_path / "u.sp"
    path.write_text("negative resistance node\nVin in 0 dc 0 ac 1\nRin in x 1k\nR1 x 0 1k\n"
                    "G1 x 0 x 0 -3m\nC1 x 0 1p\n.end\n")
    data = scan_json(path)
    assert data["summary"]["dominant_pole_hz"] is None
    assert len(data["unstable_poles"]) == 1
    assert_allclose(data["unstable_poles"][0]["real"], 1e9, rtol=1e-6)
    assert any("negative total" in w for w in data["warnings"])
    assert cap(data, "c1")["pole_share"] is None
    out = run_cli("check", str(path), "--format", "json")
    assert out.returncode == 1
    findings = json.loads(out.stdout)
    text = json.dumps(findings)
    assert "unstable-pole" in text


def test_csv_markdown_and_sarif_carry_the_signal_path():
    import csv
    import io

    sample = str(SAMPLES / "cascode_stage.sp")
    ref = scan_json(sample)
    out = run_cli("scan", sample, "--format", "csv")
    assert out.returncode == 0, out.stderr
    rows = list(csv.DictReader(io.StringIO(out.stdout)))
    assert {"transfer_tau_s", "transfer_share", "signal_gain", "on_signal_path"} <= set(rows[0])
    by_name = {r["name"]: r for r in rows}
    assert by_name["m11:cgd"]["on_signal_path"] == "False"
    assert_allclose(float(by_name["m1:cgs"]["transfer_tau_s"]), cap(ref, "m1:cgs")["transfer_tau_s"], rtol=1e-5)
    out = run_cli("scan", sample, "--format", "markdown")
    assert out.returncode == 0, out.stderr
    md = out.stdout
    assert "| signal-path estimate |" in md and "| T | T share |" in md
    assert "Off the signal path (5; transfer time constant 0)" in md
    assert "`m11:cgd`" in md.split("Off the signal path")[1].split("\n")[0]
    out = run_cli("check", sample, "--format", "sarif")
    analyses = json.loads(out.stdout)["runs"][0]["properties"]["analyses"]
    assert len(analyses) == 1
    assert_allclose(analyses[0]["summary"]["elmore_hz"], ref["summary"]["elmore_hz"], rtol=1e-9)
    assert analyses[0]["band"]["mode"] == "auto" and "m11:cgd" in analyses[0]["off_signal_path"]


def test_fix_first_names_the_largest_transfer_time_constant_and_skips_waivers():
    data = scan_json(SAMPLES / "cascode_stage.sp")
    fix = data["summary"]["fix_first"]
    top = max((c for c in data["capacitors"] if c["on_signal_path"]), key=lambda c: c["transfer_tau_s"])
    assert fix["capacitor"] == top["name"] == "m1:cgs"
    rest = data["summary"]["sum_transfer_tau_s"] - top["transfer_tau_s"]
    assert_allclose(fix["hz_without"], 1 / (2 * math.pi * rest), rtol=1e-9)
    out = run_cli("scan", str(SAMPLES / "cascode_stage.sp"))
    assert "fix first" in out.stdout and "m1:cgs: without it the signal-path estimate rises" in out.stdout
    # the compensation capacitor of this sample is waived (Miller by design): not named
    amp = scan_json(SAMPLES / "two_stage_amp.sp")
    assert amp["summary"]["fix_first"]["capacitor"] != "cc"


def test_no_gain_is_grounded_and_numbers_print_plainly(tmp_path):
    """C2 bridges node a to node y, which only a resistor to ground holds: with capacitors
    open y does not move (K = 0 up to round-off), so C2 is classed grounded, not Miller."""
    from tauscan.report.scan_table import num as _num, signed_pct

    path = tmp_path / "k0.sp"
    path.write_text("no gain across\nVin in 0 dc 0 ac 1\nR1 in a 1k\nRa a 0 1k\nC1 a 0 1p\n"
                    "Ry y 0 1k\nC2 a y 1p\nG1 z 0 a 0 -10m\nRz z 0 10k\nCz z 0 10f\n.end\n")
    data = scan_json(path, "--band", "dc")
    c2 = cap(data, "c2")
    assert c2["class"] == "grounded" and abs(c2["gain"] or 0.0) < 1e-9
    assert [_num(x) for x in (1e5, -0.0, -1e-16, -133.33)] == ["100000", "0", "0", "-133"]
    assert signed_pct(-1e-5) == "0.0%" and signed_pct(0.093) == "+9.3%"
