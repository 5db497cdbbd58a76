"""The analysis result: capacitors and nodes ranked, bandwidth figures, poles.

Plain records with a JSON form and pandas views for notebooks and scripts.
"""

from __future__ import annotations

import math
from itertools import repeat
from operator import add, attrgetter
from collections.abc import Mapping
from dataclasses import dataclass, field


_INF = math.inf


def _finite(x: float | None) -> float | None:
    """``x`` as a float, or None when it is None, infinite or NaN (JSON has neither)."""
    if x is None:
        return None
    if type(x) is not float:
        x = float(x)
    return x if -_INF < x < _INF else None


class _Compact:
    """Pickles as the class and a tuple of the field values (a batch sends tens of thousands
    of these back from each worker; the default form repeats every field name)."""

    __slots__ = ()

    def __reduce__(self):
        return (type(self), tuple(getattr(self, name) for name in self.__slots__))


@dataclass(slots=True)
class CapacitorResult(_Compact):
    name: str
    node_in: str
    node_out: str
    farads: float
    klass: str
    gain: float | None
    gain_reverse: float | None
    factor_in: float
    factor_out: float | None
    ohms: float
    tau_s: float
    share: float
    part_in_s: float
    part_out_s: float
    miller_excess_s: float
    pole_share: float | None
    octc_hz_if_removed: float | None
    octc_hz_if_cascoded: float | None
    file: str
    line: int
    device: str | None = None
    comment: str = ""
    #: transfer time constant T_k (signed) and its share of the first moment (Hajimiri,
    #: IEEE Trans. Circuits Syst. I 57(6), 2010); None without a transfer
    transfer_tau_s: float | None = None
    transfer_share: float | None = None
    #: the signal's own gain across it at low frequency, v(node_out) / v(node_in)
    signal_gain: float | None = None
    on_signal_path: bool = True

    def to_json(self, waived: str | None = None) -> dict:
        """The JSON record; ``waived``: the reason of the waiver that applies (the lint stage's)."""
        return {
            "name": self.name,
            "node_in": self.node_in,
            "node_out": self.node_out,
            "farads": self.farads,
            "class": self.klass,
            "gain": _finite(self.gain),
            "factor_in": _finite(self.factor_in),
            "factor_out": _finite(self.factor_out),
            "ohms": _finite(self.ohms),
            "tau_s": _finite(self.tau_s),
            "share": _finite(self.share),
            "pole_share": _finite(self.pole_share),
            "octc_hz_if_removed": _finite(self.octc_hz_if_removed),
            "octc_hz_if_cascoded": _finite(self.octc_hz_if_cascoded),
            "tau_in_s": _finite(self.part_in_s),
            "tau_out_s": _finite(self.part_out_s),
            "transfer_tau_s": _finite(self.transfer_tau_s),
            "transfer_share": _finite(self.transfer_share),
            "signal_gain": _finite(self.signal_gain),
            "on_signal_path": bool(self.on_signal_path),
            "file": self.file,
            "line": self.line,
            "waived": waived,
        }


#: The JSON record of a capacitor: (JSON key, attribute), in the order of
#: :meth:`CapacitorResult.to_json` (a test holds the two to each other).
_RECORD = (("name", "name"), ("node_in", "node_in"), ("node_out", "node_out"), ("farads", "farads"),
           ("class", "klass"), ("gain", "gain"), ("factor_in", "factor_in"), ("factor_out", "factor_out"),
           ("ohms", "ohms"), ("tau_s", "tau_s"), ("share", "share"), ("pole_share", "pole_share"),
           ("octc_hz_if_removed", "octc_hz_if_removed"), ("octc_hz_if_cascoded", "octc_hz_if_cascoded"),
           ("tau_in_s", "part_in_s"), ("tau_out_s", "part_out_s"), ("transfer_tau_s", "transfer_tau_s"),
           ("transfer_share", "transfer_share"), ("signal_gain", "signal_gain"),
           ("on_signal_path", "on_signal_path"), ("file", "file"), ("line", "line"))
_RECORD_KEYS = tuple(k for k, _ in _RECORD) + ("waived",)
_RECORD_VALUES = attrgetter(*(a for _, a in _RECORD))


def capacitor_records(caps: list[CapacitorResult], waived: Mapping[str, str]) -> list[dict]:
    """:meth:`CapacitorResult.to_json` of every capacitor, made a record at a time by C loops
    (an extracted netlist has 10^5 of them).  Non-finite numbers stay as they are: the JSON
    writer (orjson) writes them as null, as ``to_json`` does."""
    keys = _RECORD_KEYS
    reason = waived.get
    if not waived:
        rows = map(add, map(_RECORD_VALUES, caps), repeat((None,)))
    else:
        rows = map(add, map(_RECORD_VALUES, caps), zip(map(reason, map(attrgetter("name"), caps))))
    return list(map(dict, map(zip, repeat(keys), rows)))


@dataclass(slots=True)
class NodeResult(_Compact):
    node: str
    tau_s: float
    share: float
    miller_tau_s: float
    miller_share: float
    miller_dominated: bool
    transfer_tau_s: float | None = None
    transfer_share: float | None = None
    #: share of the node's transfer time constant that the signal's Miller gain adds
    signal_miller_share: float | None = None
    on_signal_path: bool = True

    def to_json(self) -> dict:
        return {
            "node": self.node,
            "tau_s": _finite(self.tau_s),
            "share": _finite(self.share),
            "miller_share": _finite(self.miller_share),
            "miller_dominated": bool(self.miller_dominated),
            "transfer_tau_s": _finite(self.transfer_tau_s),
            "transfer_share": _finite(self.transfer_share),
            "signal_miller_share": _finite(self.signal_miller_share),
            "on_signal_path": bool(self.on_signal_path),
        }


_NODE_KEYS = ("node", "tau_s", "share", "miller_share", "miller_dominated", "transfer_tau_s", "transfer_share",
              "signal_miller_share", "on_signal_path")
_NODE_VALUES = attrgetter(*_NODE_KEYS)


def node_records(nodes: list[NodeResult]) -> list[dict]:
    """:meth:`NodeResult.to_json` of every node, by C loops (see :func:`capacitor_records`)."""
    keys = _NODE_KEYS
    return list(map(dict, map(zip, repeat(keys), map(_NODE_VALUES, nodes))))


@dataclass
class Analysis:
    netlist: str
    title: str
    source: str | None
    probe: str | None
    sum_tau_s: float
    octc_hz: float | None
    poles: list[complex]
    poles_complete: bool
    dominant_pole_hz: float | None
    dominant_q: float | None
    f3db_hz: float | None
    f3db_note: str
    dc_gain: float | None
    capacitors: list[CapacitorResult]
    nodes: list[NodeResult]
    inductor_tau_s: float = 0.0
    excluded: list[str] = field(default_factory=list)
    warnings: list[str] = field(default_factory=list)
    methods: dict[str, str] = field(default_factory=dict)
    bias_regions: dict[str, str] = field(default_factory=dict)
    floating: list[str] = field(default_factory=list)
    #: nodes that respond to the source below the estimate (None: no source, or not known)
    signal_nodes: frozenset[str] | None = None
    #: (frequencies in Hz, |H|) from the source to the probe, when a sweep was asked for
    curve: tuple[list[float], list[float]] | None = None
    #: the mid-band circuit that was analysed (a :class:`tauscan.analysis.band.Band`)
    band: object | None = None
    #: 1 / (2 pi sum T): the signal-path estimate of the -3 dB frequency
    elmore_hz: float | None = None
    #: the first moment of the transfer, -H'(0)/H(0) (signed)
    sum_transfer_tau_s: float | None = None
    #: poles in the right half-plane
    unstable_poles: list[complex] = field(default_factory=list)
    #: what one unit of drive is (the gain is per that unit)
    drive_unit: str = ""
    #: why the probe is the one it is
    probe_reason: str = ""
    #: "transfer" or "octc": how capacitors and nodes are ranked
    rank: str = "octc"

    @property
    def on_path_capacitors(self) -> list[CapacitorResult]:
        return [c for c in self.capacitors if c.on_signal_path]

    @property
    def off_path_capacitors(self) -> list[CapacitorResult]:
        return [c for c in self.capacitors if not c.on_signal_path]

    @property
    def estimate_error(self) -> float | None:
        """How far the open-circuit estimate is from the exact -3 dB (or dominant pole): octc/exact - 1."""
        exact = self.f3db_hz or self.dominant_pole_hz
        if not exact or not self.octc_hz:
            return None
        return self.octc_hz / exact - 1.0

    def fix_first(self, skip=()) -> dict | None:
        """The capacitor whose removal raises the bandwidth estimate most, with the figures:
        on the signal path, 1 / (2 pi (sum T - T_k)) against the signal-path estimate; without
        a transfer, the open-circuit estimate without it (and with the gain across it cut to
        -1, as a cascode does, when that is the larger).  ``skip``: names left out (the
        waived ones: accepted by design).  None when nothing is ranked."""
        on = [c for c in self.on_path_capacitors if c.name not in skip]
        if self.sum_transfer_tau_s and self.sum_transfer_tau_s > 0 and self.elmore_hz and on:
            best = max(on, key=lambda c: c.transfer_tau_s or 0.0)
            rest = self.sum_transfer_tau_s - (best.transfer_tau_s or 0.0)
            if not best.transfer_tau_s or best.transfer_tau_s <= 0:
                return None
            after = 1 / (2 * math.pi * rest) if rest > 0 else None
            out = {"capacitor": best.name, "estimate": "signal-path", "hz": self.elmore_hz, "hz_without": after}
            if best.octc_hz_if_cascoded and best.octc_hz_if_removed and self.octc_hz and best.klass == "miller":
                out["octc_hz_if_cascoded"] = best.octc_hz_if_cascoded
            return out
        if not self.octc_hz or not on:
            return None
        best = max(on, key=lambda c: max(c.octc_hz_if_removed or 0.0, c.octc_hz_if_cascoded or 0.0))
        return {"capacitor": best.name, "estimate": "open-circuit", "hz": self.octc_hz,
                "hz_without": best.octc_hz_if_removed, "octc_hz_if_cascoded": best.octc_hz_if_cascoded}

    def capacitor(self, name: str) -> CapacitorResult:
        for cap in self.capacitors:
            if cap.name == name:
                return cap
        raise KeyError(name)

    def node(self, name: str) -> NodeResult:
        for n in self.nodes:
            if n.node == name:
                return n
        raise KeyError(name)

    def capacitors_frame(self, waived: Mapping[str, str] | None = None):
        """The ranked capacitors as a pandas DataFrame (one row each, JSON field names);
        ``waived``: capacitor name -> waiver reason (the lint stage's)."""
        import pandas as pd

        waived = waived or {}
        return pd.DataFrame([c.to_json(waived.get(c.name)) for c in self.capacitors], columns=CAPACITOR_COLUMNS)

    def nodes_frame(self):
        import pandas as pd

        return pd.DataFrame([n.to_json() for n in self.nodes], columns=NODE_COLUMNS)

    def summary_json(self, waived: Mapping[str, str] | None = None) -> dict:
        """The headline figures (the JSON ``summary``)."""
        return {
            "sum_tau_s": _finite(self.sum_tau_s),
            "octc_hz": _finite(self.octc_hz),
            "dominant_pole_hz": _finite(self.dominant_pole_hz),
            "dominant_pole_q": _finite(self.dominant_q),
            "f3db_hz": _finite(self.f3db_hz),
            "estimate_error": _finite(self.estimate_error),
            "dc_gain": _finite(self.dc_gain),
            "elmore_hz": _finite(self.elmore_hz),
            "sum_transfer_tau_s": _finite(self.sum_transfer_tau_s),
            "fix_first": self.fix_first(waived or ()),
        }

    def to_json(self, waived: Mapping[str, str] | None = None) -> dict:
        """The JSON form; ``waived``: capacitor name -> waiver reason (the lint stage's)."""
        waived = waived or {}
        return {
            "netlist": self.netlist,
            "source": self.source,
            "probe": self.probe,
            "probe_reason": self.probe_reason,
            "drive_unit": self.drive_unit,
            "rank": self.rank,
            "band": self.band.to_json() if self.band is not None else None,
            "summary": self.summary_json(waived),
            "capacitors": capacitor_records(self.capacitors, waived),
            "nodes": node_records(self.nodes),
            "poles": [{"hz": abs(p) / (2 * math.pi), "real": p.real, "imag": p.imag} for p in self.poles],
            "unstable_poles": [{"hz": abs(p) / (2 * math.pi), "real": p.real, "imag": p.imag} for p in self.unstable_poles],
            "warnings": list(self.warnings),
        }


CAPACITOR_COLUMNS = [
    "name", "node_in", "node_out", "farads", "class", "gain", "factor_in", "factor_out", "ohms", "tau_s",
    "share", "pole_share", "octc_hz_if_removed", "octc_hz_if_cascoded", "tau_in_s", "tau_out_s", "transfer_tau_s", "transfer_share", "signal_gain", "on_signal_path", "file", "line",
    "waived",
]
NODE_COLUMNS = ["node", "tau_s", "share", "miller_share", "miller_dominated", "transfer_tau_s", "transfer_share",
                "signal_miller_share", "on_signal_path"]

__all__ = ["Analysis", "CapacitorResult", "NodeResult", "CAPACITOR_COLUMNS", "NODE_COLUMNS"]
