"""The small-signal network with some capacitors shorted and some inductors opened: the
mid-band circuit.

A shorted capacitor merges its two nodes exactly, by renumbering (no large conductance
stands in for the short); an opened inductor drops out with its branch row.  With P the
map from the old unknowns to the new ones (each old node to the node it merges into, each
kept branch to itself, ground and dropped branches to nothing),

    G' = P^T G P,   C' = P^T C P,   b' = P^T b

which adds the KCL rows of merged nodes and the columns of their common voltage.  The
result has the interface of :class:`~tauscan.linear.smallsignal.SmallSignalNetwork`, so
every later step runs on it unchanged; the original node names still find the node they
were merged into.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import scipy.sparse as sp

from tauscan.circuit import GROUND, Element
from tauscan.errors import CircuitError
from tauscan.linear.smallsignal import CapacitorRecord, SmallSignalNetwork


@dataclass
class MergedNodes:
    """Node and branch numbering of a mid-band network (the part of
    :class:`~tauscan.network.Network` that the analysis reads)."""

    nodes: list[str]
    index: dict[str, int]
    internal: set[str]
    branch_of: dict[str, int]
    size: int

    @property
    def n_nodes(self) -> int:
        return len(self.nodes)

    def node(self, name: str) -> int:
        return self.index[name]


@dataclass
class MidBandNetwork:
    """A small-signal network with ``shorted`` capacitors merged and ``opened`` inductors
    dropped (see the module text)."""

    base: SmallSignalNetwork
    shorted: frozenset[str]
    opened: frozenset[str]
    network: MergedNodes = field(init=False)
    g: sp.csc_matrix = field(init=False)
    c: sp.csc_matrix = field(init=False)
    capacitors: list[CapacitorRecord] = field(init=False)
    ac_ground: set[str] = field(init=False)

    def __post_init__(self) -> None:
        ss = self.base
        net = ss.network
        n_nodes = net.n_nodes
        index = net.index
        parent = np.arange(n_nodes)

        def find(a: int) -> int:
            while parent[a] != a:
                parent[a] = parent[parent[a]]
                a = int(parent[a])
            return a

        for rec in ss.capacitors:
            if rec.name in self.shorted:
                a, b = find(index[rec.a]), find(index[rec.b])
                if a != b:  # the lower index (ground first, then netlist order) stays
                    parent[max(a, b)] = min(a, b)
        reps = np.array([find(i) for i in range(n_nodes)], dtype=np.int64)
        kept_nodes = np.unique(reps)  # sorted: ground (0) first
        new_of_rep = np.full(n_nodes, -1, dtype=np.int64)
        new_of_rep[kept_nodes] = np.arange(len(kept_nodes))
        node_map = new_of_rep[reps]
        branches = sorted(net.branch_of.items(), key=lambda item: item[1])
        kept_branches = [(name, old) for name, old in branches if name not in self.opened]
        new_size = len(kept_nodes) + len(kept_branches)
        full = np.full(net.size, -1, dtype=np.int64)
        full[:n_nodes] = node_map
        for k, (_name, old) in enumerate(kept_branches):
            full[old] = len(kept_nodes) + k
        old_rows = np.arange(1, net.size)
        new_rows = full[1:]
        ok = new_rows > 0
        self._p = sp.csc_matrix((np.ones(int(ok.sum())), (old_rows[ok] - 1, new_rows[ok] - 1)),
                                shape=(net.size - 1, new_size - 1))
        p = self._p
        self.g = (p.T @ ss.g @ p).tocsc()
        self.c = (p.T @ ss.c @ p).tocsc()
        self.g.eliminate_zeros()
        names = [net.nodes[i] for i in kept_nodes.tolist()]
        self.network = MergedNodes(
            nodes=names,
            index={name: int(node_map[i]) for name, i in index.items()},
            internal={name for name in net.internal if node_map[index[name]] > 0
                      and names[node_map[index[name]]] == name},
            branch_of={name: int(full[old]) for name, old in kept_branches},
            size=new_size,
        )
        self.capacitors = [r for r in ss.capacitors if r.name not in self.shorted]
        self._check_loops()
        tree_rows = {row for row, _, _, _ in self.ac_ground_tree()}
        self.ac_ground = {name for name, i in self.network.index.items()
                          if i < len(kept_nodes) and (i == 0 or i - 1 in tree_rows)}

    # -- the interface of SmallSignalNetwork ------------------------------------------
    @property
    def circuit(self):
        return self.base.circuit

    @property
    def gmin(self) -> float:
        return self.base.gmin

    @property
    def transcaps(self):
        """The devices' non-reciprocal parts: kept whole (projected into C with the rest;
        their nodes are looked up in the merged numbering)."""
        return self.base.transcaps

    @property
    def n_nodes(self) -> int:
        return self.network.n_nodes - 1

    def row(self, node: str) -> int:
        return self.network.node(node) - 1

    def inductors(self) -> list[Element]:
        return [e for e in self.base.inductors() if e.name not in self.opened]

    def dc_shorts(self) -> list[Element] | None:
        shorts = self.base.dc_shorts()
        return None if shorts is None else [e for e in shorts if e.name not in self.opened]

    def ac_ground_tree(self) -> list[tuple[int, int, int, int]]:
        """As :meth:`SmallSignalNetwork.ac_ground_tree`, on the merged nodes."""
        index, branch_of = self.network.index, self.network.branch_of
        adjacent: dict[int, list[tuple[int, Element]]] = {}
        for e in self.circuit.general:
            if e.kind == "v":
                a, b = index[e.nodes[0]], index[e.nodes[1]]
                adjacent.setdefault(a, []).append((b, e))
                adjacent.setdefault(b, []).append((a, e))
        out = []
        seen = {0}
        queue = [0]
        for node in queue:
            for other, e in adjacent.get(node, []):
                if other not in seen:
                    seen.add(other)
                    queue.append(other)
                    sign = +1 if index[e.nodes[0]] == other else -1
                    out.append((other - 1, node - 1 if node else -1, branch_of[e.name] - 1, sign))
        return out

    # -- mapping ----------------------------------------------------------------------
    def reduce(self, b: np.ndarray) -> np.ndarray:
        """A right-hand side of the base network (MNA rows, ground dropped) on this one."""
        return self._p.T @ b

    def _check_loops(self) -> None:
        """A branch whose two ends were merged (a short across a voltage source or an
        inductor) would leave a row of zeros: say which element did it."""
        index = self.network.index
        for e in self.circuit.general:
            if e.kind in "vehl" and e.name in self.network.branch_of and index[e.nodes[0]] == index[e.nodes[1]] \
                    and e.nodes[0] != e.nodes[1]:
                raise CircuitError(
                    f"{e.name}: its two nodes are joined by the mid-band shorts "
                    f"({', '.join(sorted(self.shorted)[:4])}); pin the capacitor across it open (--open)",
                    e.file, e.line)


def is_merged_ground(network: MidBandNetwork | SmallSignalNetwork, name: str) -> bool:
    return name == GROUND or network.network.index.get(name, -1) == 0
