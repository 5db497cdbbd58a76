"""Which sources drive the transfer and where it is watched.

The drive is the named source, else every independent source with an AC value, each with
its magnitude and phase (a differential drive ``ac 0.5`` / ``ac 0.5 180`` is one
excitation), scaled to one volt (or ampere) of drive: of the single source, of the largest
difference between two sources, or of the largest one when they all move together.  The
probe is the node named (``a,b``: the difference v(a) - v(b)), else the top-level node
(not inside a subcircuit instance, not tied to a source) with the largest response.
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


@dataclass(frozen=True)
class Probe:
    """The output of the transfer: v(pos) - v(neg), as MNA rows (-1: ground)."""

    name: str | None
    pos: int
    neg: int = -1

    def of(self, x: np.ndarray):
        """The probe's value in a solution vector (or the rows of a block of them)."""
        h = x[self.pos] if self.pos >= 0 else 0.0 * x[0]
        return h - x[self.neg] if self.neg >= 0 else h

    def vector(self, n: int) -> np.ndarray:
        """e with e^T x = the probe's value."""
        e = np.zeros(n)
        if self.pos >= 0:
            e[self.pos] += 1.0
        if self.neg >= 0:
            e[self.neg] -= 1.0
        return e


@dataclass(frozen=True)
class Drive:
    """The excitation: the driving sources and b per unit drive (MNA rows, ground dropped)."""

    names: tuple[str, ...]
    b: np.ndarray
    #: what one unit of drive is, in words (for the report)
    unit: str

    @property
    def name(self) -> str:
        return ",".join(self.names)


def _phasor(e: Element) -> complex:
    """The phasor :meth:`Network.ac_vector` puts in b (magnitude 1 when none is written)."""
    src = e.source
    mag = src.ac_mag if src is not None and src.ac_mag else 1.0
    phase = src.ac_phase if src is not None else 0.0
    return complex(mag * np.exp(1j * np.deg2rad(phase)))


def drive_of(ss, name: str | None) -> Drive | None:
    """The excitation of the transfer (None: no source has an AC value and none is named).

    The drive is scaled so that the gain is per volt (or ampere) of drive, whatever AC
    magnitude the netlist writes, with its sign kept.
    """
    if name is not None:
        chosen = [source_element(ss, name)]
    else:
        chosen = [e for e in ss.circuit.general if e.kind in "vi" and e.source is not None and e.source.ac_mag]
    if not chosen or chosen[0] is None:
        return None
    net = ss.network
    phasors = [_phasor(e) for e in chosen]
    b = np.zeros(net.size, dtype=complex)
    for e in chosen:
        b += net.ac_vector(e)
    if len(chosen) == 1:
        scale, unit = phasors[0], f"per {'volt' if chosen[0].kind == 'v' else 'ampere'} of {chosen[0].name}"
    else:
        spread = max(abs(p - q) for p in phasors for q in phasors)
        largest = max(phasors, key=abs)
        if spread > 1e-9 * abs(largest):
            first, second = max(((p, q) for p in phasors for q in phasors), key=lambda pq: abs(pq[0] - pq[1]))
            scale = first - second
            unit = "per unit of the largest difference between the driving sources"
        else:
            scale, unit = largest, "per unit of the common drive"
    b = b / scale
    if np.allclose(b.imag, 0.0, atol=1e-12 * max(np.abs(b).max(initial=0.0), 1e-300)):
        b = b.real.astype(complex)
    return Drive(tuple(e.name for e in chosen), b[1:], unit)


def named_probe(ss, text: str, allow_ground: bool = False) -> Probe:
    """The probe the user named: a node, or ``a,b`` for v(a) - v(b) (checked; an AC-ground
    node is refused unless ``allow_ground``, as for a probe merged into a source node by
    the mid-band shorts)."""
    parts = [t.strip().lower() for t in text.split(",")]
    if len(parts) > 2 or not all(parts):
        raise SelectionError("probe", text, "give a node, or two nodes as a,b for v(a) - v(b)")
    net = ss.network
    rows = []
    for key in parts:
        if key not in net.index or key in net.internal:
            raise SelectionError("probe", text, "no such node in the circuit" if len(parts) == 1
                                 else f"no such node {key!r} in the circuit")
        rows.append(ss.row(key))
    if len(parts) == 1 and parts[0] in ss.ac_ground and not allow_ground:
        raise SelectionError("probe", text, "is an AC ground (tied to ground through voltage sources)")
    if len(rows) == 2 and rows[0] == rows[1] and not allow_ground:
        raise SelectionError("probe", text, "names the same node twice")
    return Probe(",".join(parts), rows[0], rows[1] if len(rows) == 2 else -1)


def candidate_rows(ss) -> np.ndarray:
    """Rows that may be chosen as the default probe: top-level nodes (no subcircuit path),
    not AC grounds, not device-internal."""
    net = ss.network
    ok = np.ones(ss.n_nodes, dtype=bool)
    for name in list(ss.ac_ground) + list(net.internal):
        if name in net.index and net.index[name] > 0:
            ok[net.index[name] - 1] = False
    for row, name in enumerate(net.nodes[1:]):
        if "." in name:
            ok[row] = False
    if not ok.any():  # every node lives inside an instance: any node will do
        ok[:] = True
        for name in list(ss.ac_ground) + list(net.internal):
            if name in net.index and net.index[name] > 0:
                ok[net.index[name] - 1] = False
    return ok


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
    mags[~candidate_rows(ss)] = -1
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
