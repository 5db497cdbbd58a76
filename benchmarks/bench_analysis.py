"""Analysis speed (after the operating point) on generated chains of gain stages with RC
wiring parasitics, against the baseline of one sparse LU of G plus one solve per distinct
capacitor-terminal column.

Run: ``python benchmarks/bench_analysis.py [--nodes 10000,30000,100000] [--no-response]``.
Prints, per size: nodes, capacitors, the Z method used, analysis seconds split into
parts, the baseline seconds, their ratio, and the growth exponent between sizes.
"""

from __future__ import annotations

import argparse
import math
import os
import sys
import time

import numpy as np

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))


def baseline(ss, cols: np.ndarray) -> float:
    """One sparse LU of G (with the same ordering the analysis uses) plus one solve per column."""
    from tauscan.factorization import factor

    start = time.perf_counter()
    lu = factor(ss.g)
    n = ss.g.shape[0]
    batch = max(1, min(512, 4_000_000 // n))
    for k in range(0, len(cols), batch):
        block = cols[k : k + batch]
        rhs = np.zeros((n, len(block)))
        rhs[block, np.arange(len(block))] = 1.0
        lu.solve(rhs)
    return time.perf_counter() - start


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--nodes", default="10000,30000,100000")
    parser.add_argument("--no-response", action="store_true", help="skip the -3 dB sweep")
    parser.add_argument("--skip-baseline-above", type=int, default=60000, help="estimate the baseline from a sample of columns above this size")
    args = parser.parse_args()
    from netlist_gen import chain_file

    from tauscan.analysis import AnalysisSettings, analyze_network
    from tauscan.gcpause import paused_gc
    from tauscan.linear import linearize
    from tauscan.op import solve_dc
    from tauscan.reader import read_netlist

    print(f"{'nodes':>8} {'caps':>7} {'Z':>9} {'linearize':>9} {'analysis':>9} {'baseline':>9} {'ratio':>6}")
    previous = None
    for target in (int(x) for x in args.nodes.split(",")):
        with chain_file(target * 12 // 5) as path:  # about 5 nodes per stage with 4 wiring segments
            op = solve_dc(read_netlist(path))
        with paused_gc():  # as the pipeline runs these stages
            t0 = time.perf_counter()
            ss = linearize(op)
            t1 = time.perf_counter()
            result = analyze_network(ss, op, None, None, AnalysisSettings(response=not args.no_response))
            t2 = time.perf_counter()
        ground = ss.ac_ground
        cols = np.unique([ss.row(x) for c in ss.capacitors for x in (c.a, c.b) if x not in ground])
        if ss.n_nodes > args.skip_baseline_above:
            sample = cols[:: max(1, len(cols) // 5000)]
            base = baseline(ss, sample) * len(cols) / len(sample)
        else:
            base = baseline(ss, cols)
        n = ss.n_nodes
        ratio = (t2 - t1) / base
        print(f"{n:>8} {len(result.capacitors):>7} {result.methods['z']:>9} {t1 - t0:>9.2f} {t2 - t1:>9.2f} {base:>9.2f} {ratio:>6.2f}")
        if previous is not None:
            pn, pt = previous
            print(f"{'':>8} growth exponent of the analysis time: {math.log((t2 - t1) / pt) / math.log(n / pn):.2f}")
        previous = (n, t2 - t1)


if __name__ == "__main__":
    main()
