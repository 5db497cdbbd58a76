"""Structural checks before solving: nodes with no DC path, and loops of voltage-defined branches."""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components

from tauscan.circuit import GROUND, Circuit, Element
from tauscan.errors import CircuitError
from tauscan.network import Network

#: Element kind -> pairs of terminal positions that conduct at DC.
_DC_PAIRS = {
    "r": [(0, 1)], "v": [(0, 1)], "l": [(0, 1)], "e": [(0, 1)], "h": [(0, 1)],
    "m": [(0, 2), (0, 3), (2, 3)], "q": [(0, 1), (1, 2)], "d": [(0, 1)],
}


class _UnionFind:
    def __init__(self) -> None:
        self.parent: dict[str, str] = {}

    def find(self, a: str) -> str:
        parent = self.parent
        parent.setdefault(a, a)
        root = a
        while parent[root] != root:
            root = parent[root]
        while parent[a] != root:
            parent[a], a = root, parent[a]
        return root

    def union(self, a: str, b: str) -> bool:
        ra, rb = self.find(a), self.find(b)
        if ra == rb:
            return False
        self.parent[ra] = rb
        return True


def floating_nodes(circuit: Circuit, net: Network) -> list[str]:
    """Nodes with no DC path to ground (through resistors, sources, inductors, device channels
    and junctions); ``net`` is the circuit's numbering (device-internal nodes not yet added)."""
    names = net.nodes
    index = net.index
    a: list[int] = []
    b: list[int] = []
    for e in circuit.general:
        pairs = _DC_PAIRS.get(e.kind)
        if pairs is None:
            continue
        nodes = e.nodes
        for p, q in pairs:
            if q < len(nodes):
                a.append(index[nodes[p]])
                b.append(index[nodes[q]])
    n = len(names)
    rows = np.concatenate([np.array(a, dtype=np.int64), net.passive_a[net.passive_r]])
    cols = np.concatenate([np.array(b, dtype=np.int64), net.passive_b[net.passive_r]])
    graph = sp.csr_matrix((np.ones(len(rows)), (rows, cols)), shape=(n, n))
    _, labels = connected_components(graph, directed=False)
    ground = labels[index[GROUND]]
    return [names[i] for i in np.flatnonzero(labels != ground).tolist()]


def check_voltage_loops(circuit: Circuit) -> None:
    """Raise when voltage sources, E/H outputs and inductors form a loop (the DC matrix is singular)."""
    uf = _UnionFind()
    loop: list[Element] = []
    for e in circuit.general:
        if e.kind in ("v", "e", "h", "l"):
            a, b = e.nodes[0], e.nodes[1]
            if a == b:
                raise CircuitError(f"{e.name} is shorted: both ends on node {a!r}", e.file, e.line)
            if not uf.union(a, b):
                loop.append(e)
    if loop:
        e = loop[0]
        raise CircuitError(
            f"{e.name} closes a loop of voltage sources and inductors (nodes {e.nodes[0]}, {e.nodes[1]}): "
            "the DC solution is not defined",
            e.file,
            e.line,
        )


def check_current_sources(circuit: Circuit, floating: list[str]) -> None:
    """Raise when a current source drives a node that has no DC path (current sources in series)."""
    lost = set(floating)
    for e in circuit.general:
        if e.kind in ("i", "g", "f") and e.value:
            for node in e.nodes[:2]:
                if node in lost:
                    raise CircuitError(
                        f"{e.name} drives node {node!r}, which has no DC path to ground (current sources in series?)",
                        e.file,
                        e.line,
                    )
