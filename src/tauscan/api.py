"""A plain Python API: the same stages as the command line, for notebooks and scripts.

>>> from tauscan import api
>>> result = api.scan("samples/sensor_readout.sp", probe="samp")   # doctest: +SKIP
>>> result.capacitors_frame()[["name", "class", "gain", "tau_s", "share"]]   # doctest: +SKIP
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

from tauscan.analysis import AnalysisSettings, analyze
from tauscan.analysis.result import Analysis
from tauscan.circuit import Circuit
from tauscan.lint.gate import LintResult
from tauscan.op import OperatingPoint, operating_point
from tauscan.reader import read_netlist


def read(path: str, params: dict[str, float] | None = None) -> Circuit:
    """The flat circuit of a netlist."""
    return read_netlist(path, params)


def bias(circuit: Circuit, temp_c: float | None = None, op_file: str | None = None) -> OperatingPoint:
    """The DC operating point (solved, or with values from ``op_file``)."""
    if temp_c is not None:
        circuit.temp_c = temp_c
    return operating_point(circuit, temp_c, op_file)


@dataclass(frozen=True)
class ScanResult:
    """What :func:`scan` gives: the analysis (whose figures read as attributes of the result:
    ``result.octc_hz``, ``result.poles``, ...), the lint stage's findings and waivers, and the
    circuit and operating point they came from."""

    analysis: Analysis
    lint: LintResult
    circuit: Circuit
    op: OperatingPoint

    def __getattr__(self, name: str):
        if name.startswith("__") or name == "analysis":  # (copy and pickle look these up first)
            raise AttributeError(name)
        return getattr(self.analysis, name)

    @property
    def findings(self) -> list:
        return self.lint.findings

    @property
    def waived(self) -> dict[str, str]:
        """Capacitor name -> the reason of the waiver that covers it (settings or inline)."""
        return dict(self.lint.waived)

    def capacitors_frame(self, waived: Mapping[str, str] | None = None):
        """The ranked capacitors as a pandas DataFrame, with the waiver of each, as the JSON and
        CSV reports show it (``waived`` replaces the lint stage's waivers)."""
        return self.analysis.capacitors_frame(self.lint.waived if waived is None else waived)

    def nodes_frame(self):
        return self.analysis.nodes_frame()


def scan(path: str, *, probe: str | None = None, source: str | None = None, params: dict[str, float] | None = None,
         temp_c: float | None = None, op_file: str | None = None, settings: AnalysisSettings | None = None,
         config: str | None = None) -> ScanResult:
    """Read, bias, analyse and lint a netlist, with the settings file found from its folder (or
    ``config``) as the command line does; the result has ``capacitors_frame()`` (waivers
    included) and ``nodes_frame()``.  ``settings`` replaces the analysis settings the settings
    file would give."""
    from tauscan import pipeline

    request = pipeline.ScanRequest(path, params=dict(params or {}), temp_c=temp_c, op_file=op_file, probe=probe,
                                   source=source, config=config, analysis=settings)
    run = pipeline.scan(request)
    return ScanResult(run.analysis, run.lint, run.circuit, run.op)


__all__ = ["read", "bias", "analyze", "scan", "ScanResult", "Analysis", "AnalysisSettings"]
