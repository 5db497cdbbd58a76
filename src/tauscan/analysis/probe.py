"""Which source drives the transfer and which node it is watched at.

The source is the one named, else the first independent source with an AC value; the probe
is the node named, else the node with the largest response to the source at DC and at a
few frequencies up to a thousand times the open-circuit estimate (so that an AC-coupled
stage is judged in its pass band, not at DC).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from tauscan.analysis.systems import Factors
from tauscan.circuit import Element
from tauscan.errors import SelectionError
from tauscan.linear.smallsignal import SmallSignalNetwork

#: A node whose response is below this fraction of the largest carries no signal.
SIGNAL_FLOOR = 1e-3


def source_element(ss: SmallSignalNetwork, name: str | None) -> Element | None:
    """The named independent source, or the first one with an AC value (None: no such source)."""
    circuit = ss.circuit
    if name is not None:
        found = circuit.find(name.lower())
        if found is None or found.kind not in "vi":
            raise SelectionError("source", name, "no independent voltage or current source of that name")
        return found
    for e in circuit.general:
        if e.kind in "vi" and e.source is not None and e.source.ac_mag:
            return e
    return None


@dataclass
class ProbeChoice:
    """The probe node and what was solved on the way to it."""

    name: str | None
    row: int | None
    #: H at the probe at the frequencies already solved (reused by the -3 dB search)
    known: dict[float, complex] = field(default_factory=dict)
    #: every node's response at a tenth of the estimate, when it was solved
    low_band: np.ndarray | None = None


def choose_probe(ss: SmallSignalNetwork, factors: Factors, b: np.ndarray, probe: str | None,
                 octc: float | None) -> ProbeChoice:
    """The named probe (checked), or the node with the largest response to ``b``."""
    net = ss.network
    if probe is not None:
        key = probe.lower()
        if key not in net.index or key in net.internal:
            raise SelectionError("probe", probe, "no such node in the circuit")
        if key in ss.ac_ground:
            raise SelectionError("probe", probe, "is an AC ground (tied to ground through voltage sources)")
        return ProbeChoice(key, ss.row(key))
    n = ss.n_nodes
    solved: dict[float, np.ndarray] = {}
    if not np.any(b.imag):
        x0 = factors.lu.solve(b.real)
        mags = np.abs(x0[:n])
        solved[0.0] = x0
    else:
        mags = np.zeros(n)
    freqs = _probe_frequencies(octc) if octc else []
    if freqs:
        solver = factors.complex
        for f in freqs:
            try:
                x = solver.solve(solver.factor(2j * math.pi * f), b.astype(complex))
            except RuntimeError:  # singular at this frequency: skip it
                continue
            if np.all(np.isfinite(x)):
                mags = np.maximum(mags, np.abs(x[:n]))
                solved[f] = x
    for name in list(ss.ac_ground) + list(net.internal):
        if name in net.index and net.index[name] > 0:
            mags[net.index[name] - 1] = -1
    low = solved.get(freqs[0]) if freqs else None
    if not np.any(mags > 0):
        return ProbeChoice(None, None, {}, low)
    row = int(np.argmax(mags))
    return ProbeChoice(net.nodes[row + 1], row, {f: complex(x[row]) for f, x in solved.items()}, low)


def _probe_frequencies(octc: float) -> list[float]:
    """A tenth of the estimate (the signal-path test reads that one), up to a thousand times it."""
    return np.geomspace(octc / 10, octc * 1e3, 3).tolist()


def signal_nodes(ss: SmallSignalNetwork, factors: Factors, b: np.ndarray, octc: float | None,
                 solved: np.ndarray | None = None) -> frozenset[str] | None:
    """Nodes that respond to the source at a tenth of the estimate (at 0.1 Hz without one);
    None when that solve is singular (every node is then taken as on the signal path).

    ``solved``: the node response there, when the probe choice already solved it.
    """
    x = solved
    if x is None:
        f = (octc or 1.0) / 10
        solver = factors.complex
        try:
            x = solver.solve(solver.factor(2j * np.pi * f), b.astype(complex))
        except RuntimeError:
            return None
    mags = np.abs(x[: ss.n_nodes])
    top = mags.max(initial=0.0)
    if top == 0:
        return frozenset()
    names = ss.network.nodes
    return frozenset(names[i + 1] for i in np.flatnonzero(mags > SIGNAL_FLOOR * top))
