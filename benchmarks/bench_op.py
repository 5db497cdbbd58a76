"""DC operating point of a generated circuit with many transistors.

Run: ``python benchmarks/bench_op.py [--transistors 10000]``.  Prints the Newton
iterations, the total time and the time per iteration, and the share of one
iteration spent in the sparse LU.
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time


sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--transistors", type=int, default=10000)
    args = parser.parse_args()
    from netlist_gen import stage_chain

    from tauscan.op.solver import DCSolver
    from tauscan.reader import read_netlist

    lines = args.transistors * 12
    with tempfile.NamedTemporaryFile("w", suffix=".sp", delete=False) as handle:
        handle.write(stage_chain(lines))
        path = handle.name
    try:
        t0 = time.perf_counter()
        circuit = read_netlist(path)
        t1 = time.perf_counter()
        solver = DCSolver(circuit, 27.0)
        t2 = time.perf_counter()
        import numpy as np

        x, _states, newton_iterations = solver.newton(np.zeros(solver.size), 1.0, 0.0,
                                                      [g.initial_state() for g in solver.groups], "Newton from zero")
        t_newton = time.perf_counter() - t2
        t2 = time.perf_counter()
        op = solver.solve()
        t3 = time.perf_counter()
        # cost of one factorization of the final Jacobian, for comparison
        x = np.zeros(solver.size)
        x[: op.network.size] = op.x
        jdev, *_ = solver._devices(x, [None] * len(solver.groups), limit=False)
        a = (solver.lin + jdev).tocsc()
        t4 = time.perf_counter()
        solver._lu.factor(a)  # the solver's own LU (its ordering already chosen)
        t5 = time.perf_counter()
    finally:
        os.unlink(path)
    n_mos = sum(1 for e in circuit.general if e.kind == "m")
    per_iter = t_newton / max(newton_iterations, 1)
    print(f"transistors {n_mos}, unknowns {solver.size - 1}")
    print(f"read {t1 - t0:.2f} s, whole operating point {t3 - t2:.2f} s ({op.strategy}, {op.iterations} iterations, "
          f"including the device reports)")
    print(f"Newton alone {t_newton:.2f} s: {per_iter * 1e3:.1f} ms per iteration, of which one sparse LU "
          f"{(t5 - t4) * 1e3:.1f} ms ({(t5 - t4) / per_iter:.0%})")


if __name__ == "__main__":
    main()
