"""Small-signal analysis: every capacitor's resistance, time constant, gain and Miller class;
node sums; the bandwidth estimate against the exact poles and -3 dB; and what to fix first.

One module per job: :mod:`~tauscan.analysis.analyze` runs them in order,
:mod:`~tauscan.analysis.zentries` gives entries of G^-1, :mod:`~tauscan.analysis.timeconstants`
the open-circuit table, :mod:`~tauscan.analysis.systems` the factorizations of G and G + sC,
:mod:`~tauscan.analysis.poles` the eigen-solvers, :mod:`~tauscan.analysis.response` the
transfer and its -3 dB frequency, :mod:`~tauscan.analysis.probe` the source and probe.

>>> from tauscan import api
>>> result = api.scan("samples/sensor_readout.sp")          # doctest: +SKIP
>>> result.capacitors_frame().head()                        # doctest: +SKIP
"""

from tauscan.analysis.analyze import AnalysisSettings, analyze, analyze_network

__all__ = ["AnalysisSettings", "analyze", "analyze_network"]
