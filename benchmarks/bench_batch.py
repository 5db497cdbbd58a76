"""Batch speed-up: one 16-job batch (netlists x corners) run serially, with 2 local worker
processes (``--jobs 2``) and through a Dask LocalCluster of 2 worker processes
(``--cluster``), each as a real ``tauscan check`` command.

Run: ``python benchmarks/bench_batch.py [--lines 20000] [--repeat 3]``.  Two batches: the four
bundled samples at four corners (small circuits: process start-up weighs), and four generated
chains of ``--lines`` lines at four corners.  Prints the best of ``--repeat`` wall-clock times
and the speed-up against the serial run; the three reports are checked to be identical.
Needs the 'cluster' extra (dask.distributed).
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(HERE)
sys.path.insert(0, HERE)

CORNERS = ["--corner", "tt:temp=27", "--corner", "hot:temp=125", "--corner", "cold:temp=-40",
           "--corner", "low:temp=27,vdd=1.62"]


def _time(args: list[str], repeat: int) -> tuple[float, str]:
    best, out = float("inf"), ""
    for _ in range(repeat):
        t = time.perf_counter()
        res = subprocess.run([sys.executable, "-m", "tauscan", "check", *args], capture_output=True, text=True)
        best = min(best, time.perf_counter() - t)
        if res.returncode not in (0, 1):
            raise SystemExit(f"tauscan failed: {res.stderr}")
        out = res.stdout
    return best, out


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--lines", type=int, default=20000)
    parser.add_argument("--repeat", type=int, default=3)
    args = parser.parse_args()
    from distributed import LocalCluster

    from netlist_gen import stage_chain

    samples = [os.path.join(ROOT, "samples", f) for f in
               ("sensor_readout.sp", "cascode_stage.sp", "line_driver.sp", "two_stage_amp.sp")]
    folder = tempfile.mkdtemp()
    chains = []
    for k in range(4):
        path = os.path.join(folder, f"chain{k}.sp")
        with open(path, "w") as handle:
            handle.write(stage_chain(args.lines + 500 * k).replace("Vdd vdd 0 dc 1.8", "Vdd vdd 0 dc {vdd}")
                         .replace("Vin g0 0", ".param vdd=1.8\nVin g0 0"))
        chains.append(path)
    cluster = LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None, silence_logs=50)
    try:
        print(f"{'batch':>22} {'jobs':>5} {'serial s':>9} {'--jobs 2 s':>11} {'speed-up':>9} {'cluster s':>10} {'speed-up':>9}")
        for label, files in (("4 samples x 4 corners", samples), (f"4 chains ~{args.lines} lines x 4", chains)):
            base = [*files, *CORNERS]  # the default check table: what a CI gate prints
            serial, out1 = _time(base + ["--jobs", "1"], args.repeat)
            local, out2 = _time(base + ["--jobs", "2"], args.repeat)
            remote, out3 = _time(base + ["--cluster", cluster.scheduler_address], args.repeat)
            same = "" if out1 == out2 == out3 else "  (reports differ!)"
            print(f"{label:>22} {len(files) * 4:>5} {serial:>9.2f} {local:>11.2f} {serial / local:>9.2f} "
                  f"{remote:>10.2f} {serial / remote:>9.2f}{same}", flush=True)
    finally:
        cluster.close()
        for path in chains:
            os.unlink(path)
        os.rmdir(folder)


if __name__ == "__main__":
    main()
