"""Helpers every model's stamps share: named small-signal values of a device -> linear
primitives.  Each model says how its values are placed (its ``stamps`` function, in its own
module); values given by the user (``--op``) are placed exactly as computed ones are."""

from __future__ import annotations

import numpy as np

from tauscan.devices.base import CapacitanceMatrix, DeviceOP, SmallSignal


def mos_channel(dev: DeviceOP, out: SmallSignal) -> None:
    """A MOSFET's channel: gm (controlled by g - s) and gmb (by b - s) from the effective drain
    to the effective source, and gds between them.

    Parameters
    ----------
    dev : DeviceOP
        ``nodes`` holds ``d``, ``g``, ``s``, ``b`` (the effective drain and source); ``values``
        ``gm``, ``gmb``, ``gds`` (siemens; a missing one is zero).
    out : SmallSignal
        Receives the two transconductances and the conductance.
    """
    n, v = dev.nodes, dev.values
    d, g, s, b = n["d"], n["g"], n["s"], n["b"]
    out.vccs.append(("gm", d, s, g, s, v.get("gm", 0.0)))
    out.vccs.append(("gmb", d, s, b, s, v.get("gmb", 0.0)))
    out.conductances.append(("gds", d, s, v.get("gds", 0.0)))


def capacitors(dev: DeviceOP, out: SmallSignal, terminals: dict[str, tuple[str, str]]) -> None:
    """Set ``out.capacitance``: the device's terminal capacitance matrix.

    A device whose ``cmatrix`` is given (a charge-based model) is placed by that matrix,
    unless a user-supplied operating point overrides one of its parts; otherwise each
    two-terminal part of ``dev.caps`` adds C (e_i - e_j)(e_i - e_j)^T between its terminals.

    Parameters
    ----------
    dev : DeviceOP
        The device at its operating point (``caps`` in farads, ``nodes`` by terminal key).
    out : SmallSignal
        Receives the matrix (left None when every part is zero).
    terminals : dict of str to (str, str)
        Part name -> its two terminal keys (``"cgd": ("g", "d_phys")``); also names the pairs
        of a given matrix for the report.
    """
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
    order, placed, names, needed = _layout(terminals)
    if n.keys() >= needed:  # the usual case: every terminal has its node
        caps = dev.caps
        pairs = [(part, i, j, caps[part]) for part, i, j in placed if caps.get(part)]
        if pairs:
            out.capacitance = CapacitanceMatrix(order, tuple(map(n.__getitem__, order)), None, names, pairs)
        return
    used: list[str] = []
    pairs = []
    for part, (ta, tb) in terminals.items():
        value = dev.caps.get(part)
        if value and ta in n and tb in n:
            for t in (ta, tb):
                if t not in used:
                    used.append(t)
            pairs.append((part, used.index(ta), used.index(tb), value))
    if pairs:
        out.capacitance = CapacitanceMatrix.from_pairs(tuple(used), tuple(n[t] for t in used), pairs)


_LAYOUTS: dict[int, tuple[dict, tuple]] = {}


def _layout(terminals: dict[str, tuple[str, str]]) -> tuple:
    """``(terminal order, (part, i, j) per part, pair names, the terminals)`` of a model's part map, made
    once per map (a model's map is a module constant; the cache holds it, so its id stays
    its own)."""
    found = _LAYOUTS.get(id(terminals))
    if found is not None and found[0] is terminals:
        return found[1]
    order: list[str] = []
    for ta, tb in terminals.values():
        for t in (ta, tb):
            if t not in order:
                order.append(t)
    placed = tuple((part, order.index(ta), order.index(tb)) for part, (ta, tb) in terminals.items())
    names = {(min(i, j), max(i, j)): part for part, i, j in placed}
    layout = (tuple(order), placed, names, frozenset(order))
    _LAYOUTS[id(terminals)] = (terminals, layout)
    return layout


#: A remainder below this fraction of the matrix's largest entry is round-off: no ctrans part.
RECIPROCAL = 1e-12


def split(cm: CapacitanceMatrix) -> tuple[list[tuple[str, int, int, float]], np.ndarray | None]:
    """The report's parts of a terminal matrix C: the symmetric part
    S = (C + C^T)/2 = sum over pairs of c_ij (e_i - e_j)(e_i - e_j)^T with c_ij = -S_ij, and
    the remainder A = (C - C^T)/2.

    S and A add up to C exactly, so trace(Z_T S) + trace(Z_T A) = trace(Z_T C): the device's
    entries add up to its share of trace(G^-1 C).

    Parameters
    ----------
    cm : CapacitanceMatrix
        k terminals; ``matrix`` of shape (k, k) in farads.

    Returns
    -------
    pairs : list of (part, i, j, c_ij)
        Every nonzero pair, named by ``cm.pair_names`` (c_ij < 0 is kept: it is real), farads.
    remainder : ndarray, shape (k, k), or None
        A in farads; None when C is symmetric to round-off (:data:`RECIPROCAL`).
    """
    if cm.pairs is not None:  # made of two-terminal parts: they sum to its symmetric part, exactly
        return cm.pairs, None
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
    """Series resistances between external and internal terminals, as conductances.

    Parameters
    ----------
    dev : DeviceOP
        ``series``: part -> ohms; ``nodes`` holds ``part_ext`` and ``part_int``.
    out : SmallSignal
        Receives ``(part, external node, internal node, 1/ohms)`` for every nonzero one.
    """
    for part, ohms in dev.series.items():
        ext, internal = dev.nodes[part + "_ext"], dev.nodes[part + "_int"]
        if ohms > 0 and ext != internal:
            out.conductances.append((part, ext, internal, 1.0 / ohms))
