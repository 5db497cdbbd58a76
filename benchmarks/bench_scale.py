"""End-to-end scale benchmark: time and peak memory per stage for extracted-style netlists,
against a bare baseline process that imports numpy and scipy, reads and splits the file and
does one sparse LU of its conductance matrix.

Run: ``python benchmarks/bench_scale.py [--lines 50000,100000,200000]``.  Each size runs in
its own processes, so peak resident memory is per run.
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


def _peak_mb() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024


def _child_scan(path: str) -> dict:
    times = {}
    t = time.perf_counter()
    from tauscan.analysis import AnalysisSettings, analyze_network
    from tauscan.linear import linearize
    from tauscan.op import solve_dc
    from tauscan.reader import read_netlist
    from tauscan.report import scan_json

    times["import"] = time.perf_counter() - t
    t = time.perf_counter()
    circuit = read_netlist(path)
    times["read"] = time.perf_counter() - t
    t = time.perf_counter()
    op = solve_dc(circuit)
    times["operating point"] = time.perf_counter() - t
    t = time.perf_counter()
    ss = linearize(op)
    times["linearize"] = time.perf_counter() - t
    t = time.perf_counter()
    analysis = analyze_network(ss, op, None, None, AnalysisSettings())
    times["analyze"] = time.perf_counter() - t
    t = time.perf_counter()

    class _Run:  # the JSON reporter's view of a run
        pass

    run = _Run()
    run.analysis = analysis
    run.request = type("R", (), {"netlist": path, "corner": None})()
    run.lint = type("L", (), {"findings": [], "waivers": []})()
    text = scan_json.render([run])
    times["report"] = time.perf_counter() - t
    return {"times": times, "peak_mb": _peak_mb(), "elements": len(circuit.elements), "json_bytes": len(text)}


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
    parser.add_argument("--lines", default="50000,100000,200000")
    parser.add_argument("--child", nargs=2, help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.child:
        mode, path = args.child
        print(json.dumps(_child_scan(path) if mode == "scan" else _child_baseline(path)))
        return
    from netlist_gen import chain_file

    stages = ["read", "operating point", "linearize", "analyze", "report"]
    print(f"{'lines':>8} " + " ".join(f"{s[:9]:>9}" for s in stages) + f" {'total s':>8} {'peak MB':>8} {'bare s':>7} {'ratio':>6}")
    previous = None
    for lines in (int(x) for x in args.lines.split(",")):
        with chain_file(lines) as path:
            count = sum(1 for _ in open(path))
            out = {}
            for mode in ("scan", "baseline"):
                res = subprocess.run([sys.executable, __file__, "--child", mode, path], capture_output=True, text=True, check=True)
                out[mode] = json.loads(res.stdout)
        t = out["scan"]["times"]
        total = sum(t[s] for s in stages)
        bare = out["baseline"]["seconds"]
        print(f"{count:>8} " + " ".join(f"{t[s]:>9.2f}" for s in stages)
              + f" {total:>8.2f} {out['scan']['peak_mb']:>8.0f} {bare:>7.2f} {total / bare:>6.1f}")
        if previous is not None:
            pl, pt = previous
            print(f"{'':>8} growth exponent of the total: {math.log(total / pt) / math.log(count / pl):.2f}")
        previous = (count, total)


if __name__ == "__main__":
    main()
