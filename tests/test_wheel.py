"""The grammar ships inside the wheel: build it, install it into a fresh venv, parse a sample there."""

import os
import subprocess
import sys
import sysconfig
import venv
from pathlib import Path

import pytest

from tests.conftest import ROOT, SAMPLES


@pytest.mark.slow
def test_wheel_carries_the_grammar_and_parses_a_sample(tmp_path):
    dist = tmp_path / "dist"
    build = subprocess.run(
        [sys.executable, "-m", "build", "--wheel", "--no-isolation", "--outdir", str(dist), str(ROOT)],
        capture_output=True, text=True, timeout=600,
    )
    if build.returncode != 0 and "hatchling" in build.stderr:
        # no hatchling in this environment: let build fetch it in an isolated one
        build = subprocess.run(
            [sys.executable, "-m", "build", "--wheel", "--outdir", str(dist), str(ROOT)],
            capture_output=True, text=True, timeout=600,
        )
    assert build.returncode == 0, build.stdout + build.stderr
    wheel = next(dist.glob("tauscan-*.whl"))

    env_dir = tmp_path / "fresh"
    venv.EnvBuilder(with_pip=False).create(env_dir)
    python = env_dir / "bin" / "python"
    install = subprocess.run(
        [sys.executable, "-m", "pip", "--python", str(python), "install", "--no-deps", "--quiet", str(wheel)],
        capture_output=True, text=True, timeout=600,
    )
    assert install.returncode == 0, install.stdout + install.stderr

    # dependencies (lark, numpy, ...) come from this test environment; tauscan itself only from the wheel
    deps = sysconfig.get_paths()["purelib"]
    env = dict(os.environ, PYTHONPATH=deps)
    sample = SAMPLES / "sensor_readout.sp"
    code = (
        "import tauscan, tauscan.reader.grammar as g, sys; "
        "from tauscan.reader import read_netlist; "
        f"c = read_netlist({str(sample)!r}); "
        "print(tauscan.__file__); print(g.grammar_dir()); print(len(c.elements))"
    )
    run = subprocess.run([str(python), "-c", code], capture_output=True, text=True, cwd=str(tmp_path), env=env, timeout=120)
    assert run.returncode == 0, run.stderr
    module_file, grammar, count = run.stdout.split()
    assert Path(module_file).is_relative_to(env_dir)
    assert Path(grammar).is_relative_to(env_dir) and (Path(grammar) / "netlist.lark").is_file()
    assert int(count) > 5
