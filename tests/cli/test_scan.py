"""`tauscan scan` through the real entry point: formats, the JSON contract, files."""

import csv
import io
import json
import os
from pathlib import Path

import pytest

from tests.conftest import SAMPLES, run_cli

SENSOR = str(SAMPLES / "sensor_readout.sp")

CAP_FIELDS = {"name", "node_in", "node_out", "farads", "class", "gain", "factor_in", "factor_out", "ohms", "tau_s",
              "share", "pole_share", "octc_hz_if_removed", "octc_hz_if_cascoded", "transfer_tau_s", "transfer_share",
              "signal_gain", "on_signal_path"}


def test_json_contract():
    result = run_cli("scan", SENSOR, "--format", "json", "--probe", "samp")
    assert result.returncode == 0, result.stderr
    data = json.loads(result.stdout)
    assert {"netlist", "source", "probe", "summary", "capacitors", "nodes", "poles", "findings", "warnings"} <= set(data)
    assert data["probe"] == "samp" and data["source"] == "vin"
    assert set(data["summary"]) >= {"sum_tau_s", "octc_hz", "dominant_pole_hz", "f3db_hz", "elmore_hz", "dc_gain",
                                    "sum_transfer_tau_s"}
    assert {"mode", "f_mid_hz", "f_low_hz", "f_high_hz", "f_low_estimate_hz", "states", "warnings"} <= set(data["band"])
    caps = data["capacitors"]
    assert all(CAP_FIELDS <= set(c) for c in caps)
    # ranked by transfer time constant, the signal path first (METHOD section 7)
    assert data["rank"] == "transfer"
    on = [c["on_signal_path"] for c in caps]
    assert on == sorted(on, reverse=True)
    taus = [c["transfer_tau_s"] for c in caps if c["on_signal_path"]]
    assert taus == sorted(taus, reverse=True)
    assert all(c["transfer_tau_s"] == 0 for c in caps if not c["on_signal_path"])
    # the transfer time constants add up to the first moment
    assert sum(c["transfer_tau_s"] for c in caps) == pytest.approx(data["summary"]["sum_transfer_tau_s"], rel=1e-9)
    for c in caps:
        assert c["name"] == c["name"].lower()
        if c["class"] == "grounded":
            assert c["node_out"] == "0" and c["gain"] is None and c["factor_out"] is None
        else:
            assert isinstance(c["gain"], float)
    assert {"node", "tau_s", "share", "miller_share", "miller_dominated", "transfer_tau_s", "transfer_share",
            "signal_miller_share", "on_signal_path"} <= set(data["nodes"][0])
    assert {"hz", "real", "imag"} == set(data["poles"][0])
    # shares add up to 1 (METHOD section 4)
    assert sum(c["share"] for c in caps) == pytest.approx(1.0, rel=1e-9)


def test_csv_columns():
    result = run_cli("scan", SENSOR, "--format", "csv")
    assert result.returncode == 0
    rows = list(csv.DictReader(io.StringIO(result.stdout)))
    assert CAP_FIELDS <= set(rows[0])
    assert len(rows) == len(json.loads(run_cli("scan", SENSOR, "--format", "json").stdout)["capacitors"])


def test_markdown_and_top():
    result = run_cli("scan", SENSOR, "--format", "markdown", "--top", "3")
    assert result.returncode == 0
    assert "### Capacitors on the signal path by transfer time constant (3 of 8)" in result.stdout
    assert "| # | capacitor |" in result.stdout
    assert "never replace simulation" in result.stdout


def test_output_file_plot_and_the_netlist_untouched(tmp_path):
    before = Path(SENSOR).read_bytes()
    out = tmp_path / "report.json"
    png = tmp_path / "shares.png"
    result = run_cli("scan", SENSOR, "-o", str(out), "--format", "json", "--plot", str(png), "--probe", "samp")
    assert result.returncode == 0, result.stderr
    assert json.loads(out.read_text())["probe"] == "samp"
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert Path(SENSOR).read_bytes() == before
    assert not [p for p in os.listdir(tmp_path) if p.startswith(".tauscan-")]


def test_refuses_to_overwrite_the_netlist(tmp_path):
    path = tmp_path / "n.sp"
    path.write_text(Path(SENSOR).read_text())
    result = run_cli("scan", str(path), "-o", str(path))
    assert result.returncode == 2 and "refusing" in result.stderr
    assert path.read_text() == Path(SENSOR).read_text()


@pytest.mark.parametrize(
    "args, message",
    [
        (["--probe", "nosuch"], "no such node"),
        (["--source", "r1"], "no independent voltage or current source"),
        (["--top", "-1"], "expected 0 or more"),
        (["--format", "xml"], "invalid choice"),
        (["--param", "novalue"], "NAME=VALUE"),
        (["--plot", "x.gif"], ".png or .svg"),
    ],
)
def test_bad_options_exit_2_with_one_line(args, message, tmp_path):
    result = run_cli("scan", SENSOR, *args, cwd=str(tmp_path))
    assert result.returncode == 2
    assert message in result.stderr and "Traceback" not in result.stderr


def test_table_to_a_pipe_is_plain_text():
    result = run_cli("scan", SENSOR)
    assert result.returncode == 0
    assert "Capacitors on the signal path by transfer time constant" in result.stdout and "\x1b[" not in result.stdout
    assert result.stderr == ""  # progress is shown only when stderr is a terminal


def test_plot_draws_every_corner_with_labelled_marks(tmp_path):
    svg = tmp_path / "p.svg"
    result = run_cli("scan", SENSOR, "--corner", "slow:vdd=1.6", "--corner", "fast:vdd=2.0", "--top", "3",
                     "--plot", str(svg), "--format", "json")
    assert result.returncode == 0, result.stderr
    text = svg.read_text()
    runs = json.loads(result.stdout)["runs"]
    for run in runs:  # one row per corner, each mark labelled with its value
        assert f"corner {run['corner']}" in text
        from tauscan.units import eng

        assert f"-3 dB (exact) {eng(run['summary']['f3db_hz'], 'Hz')}" in text
        assert f"dominant pole {eng(run['summary']['dominant_pole_hz'], 'Hz')}" in text
    assert "(top 3)" in text and "poles (" in text


def test_plot_extension_is_checked_before_anything_runs(tmp_path):
    broken = tmp_path / "broken.sp"
    broken.write_text("t\nR1 a b\n")  # a netlist error that a run would report
    result = run_cli("scan", str(broken), "--plot", str(tmp_path / "p.pdf"))
    assert result.returncode == 2 and "--plot writes .png or .svg" in result.stderr


def test_the_plots_sweep_spans_every_pole():
    from tauscan.pipeline import ScanRequest, scan

    run = scan(ScanRequest(str(SAMPLES / "two_stage_amp.sp"), curve_points=200))
    freqs, _ = run.response_curve()
    pole_hz = [abs(p) / (2 * 3.141592653589793) for p in run.analysis.poles if p != 0]
    assert pole_hz and freqs[0] <= min(pole_hz) and max(pole_hz) <= freqs[-1]
