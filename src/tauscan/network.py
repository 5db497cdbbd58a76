"""The modified-nodal-analysis structure of a flat circuit, shared by the DC and
small-signal stages: node and branch numbering, and the stamps of the linear
elements.

Unknowns: node voltages, then branch currents (voltage sources, E and H
sources, inductors).  Index 0 is ground; it is kept in the numbering and its
row and column are dropped when a matrix is assembled, which keeps stamping
free of special cases.

Sign conventions (SPICE): a current source ``I p n`` drives its current from
``p`` through the source to ``n``; a branch current flows from ``p`` through
the element to ``n``.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import scipy.sparse as sp

from tauscan.circuit import Circuit, Element
from tauscan.errors import CircuitError

#: Conductance from every node to ground that keeps G solvable when a node has no
#: DC path (SPICE's GMIN, Nagel 1975); such nodes are reported, never hidden.
GMIN = 1e-12

BRANCH_KINDS = frozenset("vehl")


@dataclass
class Triplets:
    """COO entries (row, col, value) gathered before assembly."""

    rows: list = field(default_factory=list)
    cols: list = field(default_factory=list)
    vals: list = field(default_factory=list)

    def add(self, r, c, v) -> None:
        self.rows.append(np.atleast_1d(np.asarray(r, dtype=np.int64)))
        self.cols.append(np.atleast_1d(np.asarray(c, dtype=np.int64)))
        self.vals.append(np.atleast_1d(np.asarray(v, dtype=float)))

    def conductance(self, a, b, g) -> None:
        """Stamp conductances ``g`` between node arrays ``a`` and ``b``."""
        a = np.atleast_1d(a)
        b = np.atleast_1d(b)
        g = np.broadcast_to(np.asarray(g, dtype=float), a.shape)
        self.add(np.concatenate([a, b, a, b]), np.concatenate([a, b, b, a]), np.concatenate([g, g, -g, -g]))

    def transconductance(self, p, n, cp, cn, gm) -> None:
        """Current ``gm*(v[cp]-v[cn])`` leaving node ``p`` and entering ``n``."""
        p, n, cp, cn = (np.atleast_1d(x) for x in (p, n, cp, cn))
        gm = np.broadcast_to(np.asarray(gm, dtype=float), p.shape)
        self.add(np.concatenate([p, p, n, n]), np.concatenate([cp, cn, cp, cn]), np.concatenate([gm, -gm, -gm, gm]))

    def extend(self, other: "Triplets") -> None:
        self.rows.extend(other.rows)
        self.cols.extend(other.cols)
        self.vals.extend(other.vals)

    def matrix(self, size: int) -> sp.csc_matrix:
        """Assemble the (size-1) x (size-1) matrix, ground row and column dropped."""
        if self.rows:
            r = np.concatenate(self.rows)
            c = np.concatenate(self.cols)
            v = np.concatenate(self.vals)
        else:
            r = c = np.zeros(0, dtype=np.int64)
            v = np.zeros(0)
        keep = (r > 0) & (c > 0)
        return sp.csc_matrix((v[keep], (r[keep] - 1, c[keep] - 1)), shape=(size - 1, size - 1))


class Network:
    """Node and branch numbering of a circuit (plus device-internal nodes)."""

    def __init__(self, circuit: Circuit) -> None:
        self.circuit = circuit
        self.nodes: list[str] = circuit.nodes()
        self.index: dict[str, int] = dict(zip(self.nodes, range(len(self.nodes))))
        table = circuit.passives
        #: node indices of the two ends of every row of the circuit's table of plain passives
        self.passive_a = np.fromiter(map(self.index.__getitem__, table.a), dtype=np.int64, count=len(table))
        self.passive_b = np.fromiter(map(self.index.__getitem__, table.b), dtype=np.int64, count=len(table))
        self.passive_values = np.array(table.values, dtype=float)
        #: rows of the table that are resistors, and capacitors
        self.passive_r = table.rows_of("r")
        self.passive_c = table.rows_of("c")
        self.internal: set[str] = set()
        self.branch_of: dict[str, int] = {}
        self._branch_elements: list[Element] = []
        self._sealed = False

    def add_internal_node(self, name: str) -> int:
        """A node inside a device (behind a series resistance)."""
        if self._sealed:
            raise RuntimeError("nodes added after the branches were numbered")
        if name not in self.index:
            self.index[name] = len(self.nodes)
            self.nodes.append(name)
            self.internal.add(name)
        return self.index[name]

    def seal(self) -> None:
        """Number the branch currents after all nodes are known."""
        if self._sealed:
            return
        for element in self.circuit.general:  # the table holds resistors and capacitors only
            if element.kind in BRANCH_KINDS:
                self.branch_of[element.name] = len(self.nodes) + len(self._branch_elements)
                self._branch_elements.append(element)
        self._sealed = True

    @property
    def n_nodes(self) -> int:
        return len(self.nodes)

    @property
    def size(self) -> int:
        """Number of unknowns including ground (index 0)."""
        return len(self.nodes) + len(self._branch_elements)

    def node(self, name: str) -> int:
        return self.index[name]

    def controlling_branch(self, element: Element) -> int:
        name = element.control[0]
        if name not in self.branch_of:
            raise CircuitError(
                f"{element.name}: controlling source {name!r} is not a voltage source", element.file, element.line
            )
        return self.branch_of[name]

    # -- linear stamps -----------------------------------------------------------
    def linear_g(self) -> Triplets:
        """Stamps of R, V, E, F, G, H and L (L as a short, its branch row ``v_p - v_n = 0``)."""
        t = Triplets()
        idx = self.index
        res_a, res_b, res_g = [], [], []
        rows, cols, vals = [], [], []
        for e in self.circuit.general:
            k = e.kind
            if k == "r":
                res_a.append(idx[e.nodes[0]])
                res_b.append(idx[e.nodes[1]])
                res_g.append(e.params.get("m", 1.0) / e.value)
            elif k in BRANCH_KINDS:
                br = self.branch_of[e.name]
                p, n = idx[e.nodes[0]], idx[e.nodes[1]]
                rows += [p, n, br, br]
                cols += [br, br, p, n]
                vals += [1.0, -1.0, 1.0, -1.0]
                if k == "e":
                    cp, cn = idx[e.nodes[2]], idx[e.nodes[3]]
                    rows += [br, br]
                    cols += [cp, cn]
                    vals += [-e.value, e.value]
                elif k == "h":
                    rows.append(br)
                    cols.append(self.controlling_branch(e))
                    vals.append(-e.value)
            elif k == "g":
                p, n, cp, cn = (idx[x] for x in e.nodes)
                rows += [p, p, n, n]
                cols += [cp, cn, cp, cn]
                vals += [e.value, -e.value, -e.value, e.value]
            elif k == "f":
                p, n = idx[e.nodes[0]], idx[e.nodes[1]]
                kc = self.controlling_branch(e)
                rows += [p, n]
                cols += [kc, kc]
                vals += [e.value, -e.value]
        if res_a:
            t.conductance(np.array(res_a), np.array(res_b), np.array(res_g))
        k = self.passive_r
        if len(k):
            t.conductance(self.passive_a[k], self.passive_b[k], 1.0 / self.passive_values[k])
        if rows:
            t.add(np.array(rows), np.array(cols), np.array(vals))
        return t

    def linear_c(self) -> Triplets:
        """Stamps of explicit capacitors, inductors (``-L`` in their branch rows) and couplings."""
        t = Triplets()
        idx = self.index
        ca, cb, cv = [], [], []
        for e in self.circuit.general:
            if e.kind == "c" and e.value:
                ca.append(idx[e.nodes[0]])
                cb.append(idx[e.nodes[1]])
                cv.append(e.value * e.params.get("m", 1.0))
            elif e.kind == "l":
                br = self.branch_of[e.name]
                t.add([br], [br], [-e.value])
            elif e.kind == "k":
                l1, l2 = (self._inductor(e, name) for name in e.control)
                mutual = e.value * np.sqrt(l1.value * l2.value)
                b1, b2 = self.branch_of[l1.name], self.branch_of[l2.name]
                t.add([b1, b2], [b2, b1], [-mutual, -mutual])
        if cv:
            t.conductance(np.array(ca), np.array(cb), np.array(cv))
        k = self.passive_c[self.passive_values[self.passive_c] != 0]
        if len(k):
            t.conductance(self.passive_a[k], self.passive_b[k], self.passive_values[k])
        return t

    def _inductor(self, k: Element, name: str) -> Element:
        element = self.circuit.find(name)
        if element is None or element.kind != "l":
            raise CircuitError(f"{k.name}: {name!r} is not an inductor", k.file, k.line)
        return element

    def source_vector(self, scale: float = 1.0) -> np.ndarray:
        """Right-hand side of the DC equations (full size, ground included)."""
        b = np.zeros(self.size)
        idx = self.index
        for e in self.circuit.general:
            if e.kind == "v":
                b[self.branch_of[e.name]] += scale * e.value
            elif e.kind == "i":
                b[idx[e.nodes[0]]] -= scale * e.value
                b[idx[e.nodes[1]]] += scale * e.value
        return b

    def ac_vector(self, source: Element) -> np.ndarray:
        """Right-hand side for a unit-phasor drive by ``source`` (its AC magnitude and phase)."""
        b = np.zeros(self.size, dtype=complex)
        mag = source.source.ac_mag if source.source and source.source.ac_mag else 1.0
        phase = np.deg2rad(source.source.ac_phase) if source.source else 0.0
        phasor = mag * np.exp(1j * phase)
        if source.kind == "v":
            b[self.branch_of[source.name]] = phasor
        elif source.kind == "i":
            b[self.index[source.nodes[0]]] -= phasor
            b[self.index[source.nodes[1]]] += phasor
        else:
            raise CircuitError(f"{source.name} is not an independent source", source.file, source.line)
        return b

    def gmin_triplets(self, g: float) -> Triplets:
        t = Triplets()
        nodes = np.arange(1, self.n_nodes)
        t.add(nodes, nodes, np.full(nodes.shape, g))
        return t


