"""--cluster: the same batch through a Dask LocalCluster (two worker processes) gives the
report of a serial local run, byte for byte."""

import json

import pytest

from tests.conftest import SAMPLES, run_cli

distributed = pytest.importorskip("distributed")

SENSOR = str(SAMPLES / "sensor_readout.sp")
DRIVER = str(SAMPLES / "line_driver.sp")


@pytest.fixture(scope="module")
def scheduler():
    cluster = distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                       dashboard_address=None, silence_logs=50)
    try:
        yield cluster.scheduler_address
    finally:
        cluster.close()


def test_cluster_results_are_those_of_a_local_run(scheduler):
    args = ["check", SENSOR, DRIVER, "--corner", "low:vdd=1.62", "--corner", "hot:temp=125", "--format", "json"]
    local = run_cli(*args, "--jobs", "1")
    remote = run_cli(*args, "--cluster", scheduler)
    assert remote.returncode == local.returncode, remote.stderr
    assert remote.stdout == local.stdout
    runs = json.loads(remote.stdout)["runs"]
    assert [(r["netlist"], r["corner"]) for r in runs] == [(SENSOR, "low"), (SENSOR, "hot"), (DRIVER, "low"), (DRIVER, "hot")]


def test_errors_on_the_cluster_keep_their_location(scheduler, tmp_path):
    bad = tmp_path / "bad.sp"
    bad.write_text("t\nR1 a b 1k\nC1 a 0 {nowhere_defined}\n")
    result = run_cli("scan", str(bad), "--corner", "a:temp=0", "--corner", "b:temp=50", "--cluster", scheduler)
    assert result.returncode == 2
    assert f"{bad}:3:" in result.stderr and "Traceback" not in result.stderr


def test_an_unreachable_scheduler_is_a_clear_error():
    result = run_cli("scan", SENSOR, "--cluster", "tcp://127.0.0.1:9", "--cluster-timeout", "2")
    assert result.returncode == 2
    assert "cannot reach the scheduler" in result.stderr and "Traceback" not in result.stderr
