"""Helpers every model's stamps share: named small-signal values of a device -> linear
primitives.  Each model says how its values are placed (its ``stamps`` function, in its own
module); values given by the user (``--op``) are placed exactly as computed ones are."""

from __future__ import annotations

import numpy as np

from tauscan.devices.base import CapacitanceMatrix, DeviceOP, SmallSignal


def capacitors(dev: DeviceOP, out: SmallSignal, terminals: dict[str, tuple[str, str]]) -> None:
    """The device's capacitances by part as its terminal matrix, each part between the
    nodes of its two terminals (``terminals``: part -> (terminal, terminal)); a device
    whose ``cmatrix`` is given (a charge-based model) is placed by that matrix instead."""
    n = dev.nodes
    if dev.cmatrix is not None and not dev.overridden.intersection(terminals):  # (values from a file win)
        order, matrix = dev.cmatrix
        names = {}
        for part, (ta, tb) in terminals.items():
            if ta in order and tb in order:
                i, j = order.index(ta), order.index(tb)
                names[(min(i, j), max(i, j))] = part
        out.capacitance = CapacitanceMatrix(tuple(order), tuple(n[t] for t in order), np.asarray(matrix, float), names)
        return
    order: list[str] = []
    pairs = []
    for part, (ta, tb) in terminals.items():
        value = dev.caps.get(part)
        if value and ta in n and tb in n:
            for t in (ta, tb):
                if t not in order:
                    order.append(t)
            pairs.append((part, order.index(ta), order.index(tb), value))
    if pairs:
        out.capacitance = CapacitanceMatrix.from_pairs(tuple(order), tuple(n[t] for t in order), pairs)


#: A remainder below this fraction of the matrix's largest entry is round-off: no ctrans part.
RECIPROCAL = 1e-12


def split(cm: CapacitanceMatrix) -> tuple[list[tuple[str, int, int, float]], np.ndarray | None]:
    """The report's parts of a terminal matrix C: the symmetric part
    S = (C + C^T)/2 = sum over pairs of c_ij (e_i - e_j)(e_i - e_j)^T with c_ij = -S_ij, as
    ``(part, i, j, c_ij)`` for every nonzero pair (c_ij < 0 is kept: it is real), and the
    remainder A = (C - C^T)/2 (None when C is symmetric to round-off).

    S and A add up to C exactly, so trace(Z_T S) + trace(Z_T A) = trace(Z_T C): the
    device's entries add up to its share of trace(G^-1 C).
    """
    c = cm.matrix
    sym = 0.5 * (c + c.T)
    pairs = []
    size = len(cm.terminals)
    named = list(cm.pair_names.items())
    seen = {ij for ij, _ in named}
    rest = [((i, j), "c" + _short(cm.terminals[i]) + _short(cm.terminals[j]))
            for i in range(size) for j in range(i + 1, size) if (i, j) not in seen]
    for (i, j), part in named + rest:
        value = -sym[i, j]
        if value:
            pairs.append((part, i, j, float(value)))
    anti = 0.5 * (c - c.T)
    scale = float(np.abs(c).max(initial=0.0))
    if scale == 0 or float(np.abs(anti).max(initial=0.0)) <= RECIPROCAL * scale:
        return pairs, None
    return pairs, anti


def _short(terminal: str) -> str:
    """A terminal's name in a part name (``d_phys`` -> ``d``)."""
    return terminal.split("_")[0]


def series(dev: DeviceOP, out: SmallSignal) -> None:
    """Series resistances between external and internal terminals, as conductances."""
    for part, ohms in dev.series.items():
        ext, internal = dev.nodes[part + "_ext"], dev.nodes[part + "_int"]
        if ohms > 0 and ext != internal:
            out.conductances.append((part, ext, internal, 1.0 / ohms))
