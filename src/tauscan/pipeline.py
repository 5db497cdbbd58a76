"""One scan of one netlist through every stage: read -> operating point -> linearize ->
analyze -> lint.  Each stage takes the previous stage's objects and returns its own."""

from __future__ import annotations

import dataclasses
import os
import time
from contextlib import contextmanager
from dataclasses import dataclass, field

import numpy as np

from tauscan.analysis import AnalysisSettings, analyze_network
from tauscan.analysis.band import BandRequest
from tauscan.analysis.result import Analysis
from tauscan.circuit import Circuit
from tauscan.errors import SelectionError, TauscanError
from tauscan.gcpause import paused_gc
from tauscan.lint import settings as lint_settings
from tauscan.lint.gate import LintResult, run_rules
from tauscan.linear import linearize
from tauscan.op import OperatingPoint, operating_point
from tauscan.reader import ReadOptions, read_netlist


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
    #: points of a source-to-probe magnitude sweep to keep with the result (0: none; plots)
    curve_points: int = 0
    #: ("auto" | "dc" | "fixed", frequency) from --band; None: the settings' choice
    band: tuple | None = None
    short: tuple[str, ...] = ()  # --short globs
    open: tuple[str, ...] = ()  # --open globs
    rank: str | None = None
    corner: str | None = None  # name of the process/voltage/temperature corner, if any
    lib_section: str | None = None  # the corner's .lib section, if it selects one
    include_dirs: tuple[str, ...] = ()  # -I folders, searched before the settings' include-dirs
    x_mega: bool | None = None  # --x-mega; None: the settings' choice
    #: analysis settings that replace those the settings file gives (the Python API's)
    analysis: AnalysisSettings | None = None
    #: the probe the first run of this netlist chose, kept for its other corners (not "given":
    #: the rules judge as they did on that first run)
    pinned_probe: str | None = None


@dataclass
class ScanRun:
    """Everything one scan produced, each stage's result as it returned it."""

    request: ScanRequest
    circuit: Circuit | None  # None when the run comes back from a worker
    op: OperatingPoint | None  # likewise
    analysis: Analysis
    lint: LintResult
    settings: lint_settings.LintSettings
    #: seconds per stage: read, operating point, linearize, analyze, lint
    timings: dict[str, float] = field(default_factory=dict)
    #: overrides the netlist has no .param for: name -> message (a batch decides whether that is an error)
    unknown_params: dict[str, str] = field(default_factory=dict)

    def response_curve(self) -> tuple[np.ndarray | None, np.ndarray | None]:
        """(freqs in Hz, |H|) of the sweep the request asked for (``curve_points``), or (None, None)."""
        if self.analysis.curve is None:
            return None, None
        freqs, mags = self.analysis.curve
        return np.asarray(freqs), np.asarray(mags)


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
                       probe=request.probe, source=request.source, band=request.band, rank=request.rank)


def read_options(request: ScanRequest, settings: lint_settings.LintSettings) -> ReadOptions:
    """The reader's options: -I folders, then the settings' include-dirs; --x-mega or the settings'."""
    x_mega = request.x_mega if request.x_mega is not None else settings.x_mega
    return ReadOptions(tuple(request.include_dirs) + tuple(settings.include_dirs), bool(x_mega))


def band_request(request: ScanRequest, settings: lint_settings.LintSettings) -> BandRequest:
    """The mid-band choice: --band over the settings' ``band``; pins from the settings'
    ``[states]`` table and --short / --open together (the command line wins on a clash)."""
    mode, freq = settings.band
    short = [g for g, state in settings.states.items() if state == "short" and g not in request.open]
    opened = [g for g, state in settings.states.items() if state == "open" and g not in request.short]
    return BandRequest(mode, freq, tuple(short) + tuple(request.short), tuple(opened) + tuple(request.open))


@dataclass
class ScanFailure:
    """A netlist of a batch that stopped with an error (the others still get their reports)."""

    request: ScanRequest
    #: the located one-line error, then the source line and a caret (as the command line prints it)
    rendered: str
    headline: str
    file: str | None
    line: int | None
    col: int | None

    @property
    def netlist(self) -> str:
        return self.request.netlist

    def to_json(self) -> dict:
        return {"netlist": self.netlist, "corner": self.request.corner, "message": self.headline,
                "file": self.file, "line": self.line, "column": self.col}


def failure_of(request: ScanRequest, exc: TauscanError) -> ScanFailure:
    if isinstance(exc, SelectionError):
        exc = exc.for_command_line()
    return ScanFailure(request, exc.render(), exc.headline(), exc.file, exc.line, exc.col)


def scan_or_failure(request: ScanRequest, progress=None) -> "ScanRun | ScanFailure":
    """:func:`scan`, with an error in the user's input returned as a :class:`ScanFailure`."""
    try:
        return scan(request, progress)
    except TauscanError as exc:
        return failure_of(request, exc)


def scan_in_worker_or_failure(request: ScanRequest) -> "ScanRun | ScanFailure":
    try:
        return scan_in_worker(request)
    except TauscanError as exc:
        return failure_of(request, exc)


def scan_in_worker(request: ScanRequest) -> ScanRun:
    """One scan in a worker process (no progress display).  Only what the reports read
    travels back: the circuit and the operating point stay behind (pickling them cost more
    than the scan itself on a batch of 2e4-line netlists); the analysis and lint results are
    complete without them."""
    return dataclasses.replace(scan(request), circuit=None, op=None)


def scan(request: ScanRequest, progress=None) -> ScanRun:
    with paused_gc():
        return _scan(request, progress)


def _scan(request: ScanRequest, progress=None) -> ScanRun:
    timed = _Timed(progress or _NoProgress())
    settings = settings_for(request)
    with timed.stage("read", f"reading {os.path.basename(request.netlist)}") as advance:
        circuit = read_netlist(request.netlist, request.params, progress=advance, lib_section=request.lib_section,
                               unknown_params="record", options=read_options(request, settings))
    with timed.stage("operating point", "operating point"):
        op = operating_point(circuit, request.temp_c, request.op_file)
    with timed.stage("linearize", "small-signal network"):
        ss = linearize(op)
    with timed.stage("analyze", "small-signal analysis"):
        chosen = request.analysis or AnalysisSettings(
            miller_threshold=settings.miller_threshold, response=request.response, curve_points=request.curve_points,
            band=band_request(request, settings), rank=settings.rank)
        analysis = analyze_network(ss, op, settings.probe or request.pinned_probe, settings.source, chosen)
        analysis.warnings.extend(circuit.warnings)
        if settings.probe is None and request.pinned_probe:
            analysis.probe_reason = "chosen on the first run of this netlist and kept for every corner"
    with timed.stage("lint", "lint rules"):
        lint = run_rules(analysis, circuit, op, settings, settings.probe is not None)
    return ScanRun(request, circuit, op, analysis, lint, settings, timed.seconds, dict(circuit.unknown_params))
