"""Reader speed: lines per second and peak memory for 10^4, 10^5 and 10^6 lines.

Run: ``python benchmarks/bench_reader.py [--sizes 10000,100000,1000000] [--repeat 3]``.
Each run is a process of its own, so that the peak resident memory is its own.  Prints the
reader's rate, a bare ``str.split`` of the same file, and their ratio: medians of ``--repeat``
runs of each (the two taken in turn), with the spread of the ratio between runs beside it.
What a process pays once (the import of the package, about 0.1 s, and the building of the
Lark parsers from grammar/, about 0.02 s) is not in the rate: it is printed apart, as
``startup s``.
"""

from __future__ import annotations

import argparse
import os
import resource
import statistics
import subprocess
import sys
import time

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, HERE)


def _child(path: str, mode: str) -> None:
    startup = 0.0
    if mode != "split":  # once per process: the import (lark, numpy) and the grammar's parsers
        start = time.perf_counter()
        from tauscan.reader import read_netlist
        from tauscan.reader.grammar import card_parser, expression_parser

        card_parser()
        expression_parser()
        startup = time.perf_counter() - start
    start = time.perf_counter()
    if mode == "split":
        with open(path, encoding="utf-8") as handle:
            count = sum(1 for line in handle.read().splitlines() if line.split())
    else:
        count = len(read_netlist(path).elements)
    seconds = time.perf_counter() - start
    peak_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(f"{count} {seconds:.6f} {peak_mb:.1f} {startup:.6f}")


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--sizes", default="10000,100000,1000000")
    parser.add_argument("--repeat", type=int, default=3,
                        help="runs of each process per size, read and split taken in turn; medians are printed")
    parser.add_argument("--child", nargs=2, help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.child:
        _child(*args.child)
        return
    from netlist_gen import chain_file

    print(f"{'lines':>9} {'elements':>9} {'read s':>8} {'lines/s':>10} {'peak MB':>8} {'split s':>8} {'ratio':>6}"
          f" {'(min-max)':>10} {'startup s':>9}")
    for size in (int(s) for s in args.sizes.split(",")):
        with chain_file(size) as path:
            lines = sum(1 for _ in open(path))
            reads: list[list[str]] = []
            splits: list[float] = []
            for _ in range(max(1, args.repeat)):  # in turn: a busy spell of the machine hits both
                for mode in ("read", "split"):
                    out = subprocess.run([sys.executable, __file__, "--child", path, mode], capture_output=True,
                                         text=True, check=True)
                    if mode == "read":
                        reads.append(out.stdout.split())
                    else:
                        splits.append(float(out.stdout.split()[1]))
            ratios = [float(r[1]) / sp for r, sp in zip(reads, splits)]
            count = reads[0][0]
            seconds = statistics.median(float(r[1]) for r in reads)
            peak = max(float(r[2]) for r in reads)
            startup = statistics.median(float(r[3]) for r in reads)
            split_seconds = statistics.median(splits)
            rate = lines / seconds
            spread = f"{min(ratios):.1f}-{max(ratios):.1f}"
            print(f"{lines:>9} {count:>9} {seconds:>8.3f} {rate:>10.0f} {peak:>8.1f} {split_seconds:>8.3f}"
                  f" {seconds / split_seconds:>6.1f} {spread:>10} {startup:>9.3f}")


if __name__ == "__main__":
    main()
