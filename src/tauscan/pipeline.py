"""One scan of one netlist through every stage: read -> operating point -> linearize ->
analyze -> lint.  Each stage takes the previous stage's objects and returns its own."""

from __future__ import annotations

import os
import time
from contextlib import contextmanager
from dataclasses import dataclass, field

from tauscan.analysis import AnalysisSettings, analyze_network
from tauscan.analysis.result import Analysis
from tauscan.circuit import Circuit
from tauscan.gcpause import paused_gc
from tauscan.lint import settings as lint_settings
from tauscan.lint.gate import LintResult, run_rules, signal_nodes
from tauscan.linear import linearize
from tauscan.op import OperatingPoint, operating_point
from tauscan.reader import read_netlist


@dataclass
class ScanRequest:
    netlist: str
    params: dict[str, float] = field(default_factory=dict)
    temp_c: float | None = None
    op_file: str | None = None
    probe: str | None = None
    source: str | None = None
    config: str | None = None  # explicit settings file; None: search from the netlist's folder
    min_bandwidth: float | None = None
    fail_on: str | None = None
    response: bool = True
    corner: str | None = None  # name of the process/voltage/temperature corner, if any
    lib_section: str | None = None  # the corner's .lib section, if it selects one


@dataclass
class ScanRun:
    request: ScanRequest
    circuit: Circuit | None  # None when the run comes back from a worker
    op: OperatingPoint | None
    analysis: Analysis
    lint: LintResult
    settings: lint_settings.LintSettings
    network: object = None  # the small-signal network (for plots)
    #: seconds per stage: read, operating point, linearize, analyze, lint
    timings: dict = field(default_factory=dict)

    def response_curve(self, points: int = 200):
        """(freqs, |H|) from the source to the probe around the figures of interest, or (None, None)."""
        from tauscan.analysis.poles import response_curve

        a = self.analysis
        ss = self.network
        if ss is None or a.source is None or a.probe is None:
            return None, None
        marks = [f for f in (a.octc_hz, a.dominant_pole_hz, a.f3db_hz) if f]
        if not marks:
            return None, None
        b = ss.network.ac_vector(self.circuit.element(a.source))[1:]
        return response_curve(ss.g, ss.c, b, ss.row(a.probe), min(marks) / 1e3, max(marks) * 1e3, points, cache=ss)


def _ignore(_done: int, _total: int) -> None:
    pass


class _NoProgress:
    @contextmanager
    def stage(self, _name: str):
        yield _ignore


class _Timed:
    """Wraps a progress display and records the seconds of each stage."""

    def __init__(self, inner) -> None:
        self.inner = inner
        self.seconds: dict[str, float] = {}

    @contextmanager
    def stage(self, key: str, name: str):
        start = time.perf_counter()
        with self.inner.stage(name) as advance:
            yield advance
        self.seconds[key] = time.perf_counter() - start


def settings_for(request: ScanRequest) -> lint_settings.LintSettings:
    path = request.config or lint_settings.find_config(request.netlist)
    base = lint_settings.load(path) if path else lint_settings.LintSettings()
    return base.merged(min_bandwidth=request.min_bandwidth, fail_on=request.fail_on,
                       probe=request.probe, source=request.source)


def scan_in_worker(request: ScanRequest) -> ScanRun:
    """One scan in a worker process (no progress display).  Only what the reports read
    travels back: the circuit, the operating point and the small-signal matrices stay
    behind (pickling them cost more than the scan itself on a batch of 2e4-line netlists)."""
    run = scan(request)
    run.network = None
    run.circuit = None
    run.op = None
    return run


def scan(request: ScanRequest, progress=None) -> ScanRun:
    with paused_gc():
        return _scan(request, progress)


def _scan(request: ScanRequest, progress=None) -> ScanRun:
    timed = _Timed(progress or _NoProgress())
    settings = settings_for(request)
    with timed.stage("read", f"reading {os.path.basename(request.netlist)}") as advance:
        circuit = read_netlist(request.netlist, request.params, progress=advance, lib_section=request.lib_section)
    with timed.stage("operating point", "operating point"):
        op = operating_point(circuit, request.temp_c, request.op_file)
    with timed.stage("linearize", "small-signal network"):
        ss = linearize(op)
    with timed.stage("analyze", "small-signal analysis"):
        analysis = analyze_network(ss, op, settings.probe, settings.source,
                                   AnalysisSettings(miller_threshold=settings.miller_threshold, response=request.response))
        analysis.warnings.extend(circuit.warnings)
    with timed.stage("lint", "lint rules"):
        signal = signal_nodes(analysis, ss, op)
        lint = run_rules(analysis, circuit, op, settings, settings.probe is not None, signal)
    return ScanRun(request, circuit, op, analysis, lint, settings, ss, timed.seconds)
