"""A plain Python API: the same stages as the command line, for notebooks and scripts.

>>> from tauscan import api
>>> result = api.scan("samples/sensor_readout.sp", probe="samp")   # doctest: +SKIP
>>> result.capacitors_frame()[["name", "class", "gain", "tau_s", "share"]]   # doctest: +SKIP
"""

from __future__ import annotations

from tauscan.analysis import AnalysisSettings, analyze
from tauscan.analysis.result import Analysis
from tauscan.circuit import Circuit
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


def scan(path: str, *, probe: str | None = None, source: str | None = None, params: dict[str, float] | None = None,
         temp_c: float | None = None, op_file: str | None = None, settings: AnalysisSettings | None = None) -> Analysis:
    """Read, bias and analyse a netlist; the result has ``capacitors_frame()`` and ``nodes_frame()``."""
    circuit = read(path, params)
    op = bias(circuit, temp_c, op_file)
    return analyze(op, probe=probe, source=source, settings=settings)


__all__ = ["read", "bias", "scan", "Analysis", "AnalysisSettings"]
