"""End-to-end scale benchmark: time and peak memory per stage for extracted-style netlists
(chains and meshes of gain stages with RC wiring on every net), against a bare baseline
process that imports numpy and scipy, reads and splits the file, and does one sparse LU of
its conductance matrix.

Run: ``python benchmarks/bench_scale.py [--kinds identical,mesh,chain] [--lines 10000,50000,200000]``
(add 1000000 for the largest run); ``--band both`` runs each scan with the mid-band search
and the transfer time constants (auto) and without them (dc), to show what they cost.  Each scan and each baseline runs in its own process,
so peak resident memory is per run.  The scan is the real pipeline (``tauscan scan``'s
stages) followed by the terminal table and, timed apart, the JSON report.
"""

from __future__ import annotations

import argparse
import json
import math
import os
import resource
import subprocess
import sys
import time

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, HERE)

STAGES = ["read", "operating point", "linearize", "analyze", "lint", "table"]


def _peak_mb() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024


def _child_scan(path: str, band: str = "auto") -> dict:
    start = time.perf_counter()
    from tauscan.gcpause import paused_gc
    from tauscan.pipeline import ScanRequest, scan
    from tauscan.report import scan_json, scan_table

    imported = time.perf_counter() - start
    run = scan(ScanRequest(path, band=(band, None)))
    times = dict(run.timings)
    t = time.perf_counter()
    with paused_gc():  # as the command line renders its reports
        table = scan_table.render([run], 20)
    times["table"] = time.perf_counter() - t
    total = time.perf_counter() - start
    peak = _peak_mb()
    t = time.perf_counter()
    with paused_gc():
        text = scan_json.render_bytes([run])
    json_s = time.perf_counter() - t
    return {"times": times, "import": imported, "total": total, "peak_mb": peak, "json_s": json_s,
            "json_mb": len(text) / 1e6, "table_chars": len(table), "elements": len(run.circuit.elements),
            "capacitors": len(run.analysis.capacitors)}


def _child_baseline(path: str) -> dict:
    t = time.perf_counter()
    import numpy as np
    import scipy.sparse as sp
    import scipy.sparse.linalg as spla

    with open(path, encoding="utf-8") as handle:
        rows = [line.split() for line in handle.read().splitlines()]
    index: dict[str, int] = {"0": 0}
    a, b, g = [], [], []
    for r in rows:
        if r and r[0][0] in "rR" and len(r) >= 4:
            for node in r[1:3]:
                index.setdefault(node, len(index))
            a.append(index[r[1]])
            b.append(index[r[2]])
            g.append(1e-3)
    n = len(index)
    a, b, g = np.array(a), np.array(b), np.array(g)
    m = sp.csc_matrix((np.concatenate([g, g, -g, -g]), (np.concatenate([a, b, a, b]), np.concatenate([a, b, b, a]))), shape=(n, n))
    m = (m + sp.eye(n) * 1e-9)[1:, 1:].tocsc()
    spla.splu(m, permc_spec="MMD_AT_PLUS_A")
    return {"seconds": time.perf_counter() - t, "peak_mb": _peak_mb()}


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--kinds", default="identical,mesh")
    parser.add_argument("--lines", default="10000,50000,200000")
    parser.add_argument("--band", default="auto",
                        help="auto (the default: pass-band sweep, mid-band states and transfer time constants), "
                             "dc (the DC circuit, no band search), or both to print the two side by side")
    parser.add_argument("--child", nargs=3, help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.child:
        mode, path, band = args.child
        print(json.dumps(_child_scan(path, band) if mode == "scan" else _child_baseline(path)))
        return
    from netlist_gen import chain_file

    heads = ["read", "op", "linearize", "analyze", "lint", "table"]
    bands = ["auto", "dc"] if args.band == "both" else [args.band]
    print(f"{'kind':>5} {'band':>4} {'lines':>8} " + " ".join(f"{h:>9}" for h in heads)
          + f" {'total s':>8} {'peak MB':>8} {'bare s':>7} {'ratio':>6} {'json s':>7} {'w/ json':>8}")
    for kind in args.kinds.split(","):
        previous: dict[str, tuple[int, float]] = {}
        for lines in (int(x) for x in args.lines.split(",")):
            with chain_file(lines, kind) as path:
                count = sum(1 for _ in open(path))
                out = {}
                for mode in ["baseline"] + bands:
                    res = subprocess.run([sys.executable, __file__, "--child", "baseline" if mode == "baseline" else "scan",
                                          path, mode], capture_output=True, text=True, check=True)
                    out[mode] = json.loads(res.stdout)
            bare = out["baseline"]["seconds"]
            for band in bands:
                scan = out[band]
                t = scan["times"]
                total = scan["total"]
                print(f"{kind:>5} {band:>4} {count:>8} " + " ".join(f"{t[s]:>9.2f}" for s in STAGES)
                      + f" {total:>8.2f} {scan['peak_mb']:>8.0f} {bare:>7.2f} {total / bare:>6.1f} {scan['json_s']:>7.2f}"
                      + f" {(total + scan['json_s']) / bare:>8.1f}", flush=True)
                if band in previous:
                    pl, pt = previous[band]
                    print(f"{'':>19} growth exponent of the total since {pl} lines: "
                          f"{math.log(total / pt) / math.log(count / pl):.2f}", flush=True)
                previous[band] = (count, total)
    print("total: import + every stage + the table; json: writing the JSON report besides (not in the total); "
          "w/ json: (total + json) / bare, the figure of 'scan --format json' against the bare process")


if __name__ == "__main__":
    main()
