"""The small-signal network of modified nodal analysis: ``(G + sC) x = b``.

Every element is replaced by its linear model at the operating point;
independent voltage sources become shorts (their MNA rows with zero value) and
current sources opens.  G holds conductances, transconductances and the
branch rows; C the capacitances (and ``-L`` in inductor rows).  GMIN is put
from every node to ground.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from operator import itemgetter

import numpy as np
import scipy.sparse as sp

from tauscan.circuit import GROUND, Circuit, Element
from tauscan.devices.stamps import split as split_capacitance
from tauscan.network import GMIN, Network, Triplets
from tauscan.op.result import OperatingPoint


@dataclass(slots=True)
class CapacitorRecord:
    """One capacitor of the small-signal network: an element or a device part (``m1:cgd``)."""

    name: str
    a: str
    b: str
    farads: float
    file: str
    line: int
    device: str | None = None  # the device it belongs to, for device parts
    comment: str = ""


@dataclass(slots=True)
class TransCapRecord:
    """The non-reciprocal part of one device's terminal capacitance matrix,
    A = (C - C^T)/2 over the device's terminal nodes: reported as ``device:ctrans``, its
    time constant trace(Z_T A) (Z_T: the block of G^-1 at those nodes)."""

    name: str
    nodes: tuple[str, ...]
    matrix: np.ndarray
    file: str
    line: int
    device: str


@dataclass
class SmallSignalNetwork:
    circuit: Circuit
    network: Network
    g: sp.csc_matrix  # (size-1)^2, ground dropped
    c: sp.csc_matrix
    capacitors: list[CapacitorRecord]
    ac_ground: set[str]
    gmin: float
    #: the devices' non-reciprocal capacitance parts (stamped in ``c`` besides the capacitors)
    transcaps: list[TransCapRecord] = field(default_factory=list)

    @property
    def n_nodes(self) -> int:
        """Node unknowns (ground excluded); the first rows of G and C."""
        return self.network.n_nodes - 1

    def row(self, node: str) -> int:
        """Row of a node in G and C (-1 for ground)."""
        return self.network.node(node) - 1

    def inductors(self) -> list[Element]:
        """The inductors in the network (each has a branch row)."""
        return [e for e in self.circuit.general if e.kind == "l"]

    def dc_shorts(self) -> list[Element] | None:
        """Voltage sources and inductors (shorts at DC, whose nodes a nodal matrix merges);
        None when E, F or H sources need branch rows."""
        general = self.circuit.general
        if any(e.kind in "efh" for e in general):
            return None
        return [e for e in general if e.kind in "vl"]

    def ac_ground_tree(self) -> list[tuple[int, int, int, int]]:
        """The AC-ground nodes as ``(row, parent row or -1 for ground, source branch row,
        sign)``, each after its parent: v[row] = v[parent] + sign * b[branch] in an AC
        solve, b[branch] being the source's AC value (0 for every source not driven)."""
        branch = self.network.branch_of
        return [(self.row(node), self.row(parent) if parent != GROUND else -1, branch[e.name] - 1,
                 +1 if node == e.nodes[0] else -1)
                for node, parent, e in _source_tree(self.circuit)]


def _source_tree(circuit: Circuit) -> list[tuple[str, str, Element]]:
    """Nodes tied to ground through independent voltage sources only, breadth first from
    ground: ``(node, the node it is reached from, the source between them)``."""
    adjacent: dict[str, list[tuple[str, Element]]] = {}
    for e in circuit.general:
        if e.kind == "v":
            a, b = e.nodes
            adjacent.setdefault(a, []).append((b, e))
            adjacent.setdefault(b, []).append((a, e))
    out = []
    seen = {GROUND}
    queue = [GROUND]
    for node in queue:  # grows while it is walked
        for other, e in adjacent.get(node, []):
            if other not in seen:
                seen.add(other)
                queue.append(other)
                out.append((other, node, e))
    return out


def ac_grounds(circuit: Circuit) -> set[str]:
    """Nodes tied to ground through independent voltage sources only (AC grounds)."""
    return {GROUND} | {node for node, _, _ in _source_tree(circuit)}


def _device_stamps(op: OperatingPoint, g: Triplets, c: Triplets) -> tuple[list[CapacitorRecord], list[TransCapRecord]]:
    """Stamp every device's conductances and transconductances into ``g`` and its terminal
    capacitance matrix into ``c`` (gathered in plain lists and added as one block: per-device
    numpy calls would dominate large circuits).  Returns the report's parts of the matrices
    (:func:`tauscan.devices.stamps.split`): the two-terminal capacitors of their symmetric
    parts, stamped as such, and the non-reciprocal remainders, stamped entry by entry."""
    idx = op.network.index
    caps: list[CapacitorRecord] = []
    trans: list[TransCapRecord] = []
    ga, gb, gv = [], [], []
    tp, tn, tcp, tcn, tv = [], [], [], [], []
    ar, ac, av = [], [], []
    for dev in op.devices:
        ss = dev.small_signal()
        for _part, a, b, value in ss.conductances:
            if value:
                ga.append(idx[a])
                gb.append(idx[b])
                gv.append(value)
        for _part, p, n, cp, cn, value in ss.vccs:
            if value:
                tp.append(idx[p])
                tn.append(idx[n])
                tcp.append(idx[cp])
                tcn.append(idx[cn])
                tv.append(value)
        cm = ss.capacitance
        if cm is None:
            continue
        if cm.pairs is not None:  # two-terminal parts (the split's own shortcut, inlined: one per device)
            pairs, remainder = cm.pairs, None
        else:
            pairs, remainder = split_capacitance(cm)
        nodes = cm.nodes
        name, file, line = dev.name, dev.file, dev.line
        caps.extend([CapacitorRecord(f"{name}:{part}", nodes[i], nodes[j], value, file, line, name)
                     for part, i, j, value in pairs])
        if remainder is not None:
            rows = [idx[x] for x in nodes]
            for i, j in zip(*np.nonzero(remainder)):
                ar.append(rows[i])
                ac.append(rows[j])
                av.append(float(remainder[i, j]))
            trans.append(TransCapRecord(f"{dev.name}:ctrans", nodes, remainder, dev.file, dev.line, dev.name))
    if gv:
        g.conductance(np.array(ga), np.array(gb), np.array(gv))
    if tv:
        g.transconductance(np.array(tp), np.array(tn), np.array(tcp), np.array(tcn), np.array(tv))
    if caps:
        c.conductance(np.array([idx[cap.a] for cap in caps]), np.array([idx[cap.b] for cap in caps]),
                      np.array([cap.farads for cap in caps]))
    if av:
        c.add(np.array(ar), np.array(ac), np.array(av))
    return caps, trans


def linearize(op: OperatingPoint, gmin: float = GMIN) -> SmallSignalNetwork:
    """Build sparse G and C at the operating point, and the list of every capacitor."""
    net = op.network
    circuit = op.circuit
    g = net.linear_g()
    c = net.linear_c()
    device_caps, trans = _device_stamps(op, g, c)
    g.extend(net.gmin_triplets(gmin))
    table = circuit.passives
    names, a, b, farads, files, lines = table.names, table.a, table.b, table.values, table.files, table.lines
    rows = net.passive_c.tolist()
    if len(rows) > 1:  # the table's capacitor rows, column by column (each column taken in C)
        take = itemgetter(*rows)
        explicit = list(map(CapacitorRecord, take(names), take(a), take(b), take(farads), take(files), take(lines)))
    else:
        explicit = [CapacitorRecord(names[k], a[k], b[k], farads[k], files[k], lines[k]) for k in rows]
    explicit += [_explicit(e) for e in circuit.general if e.kind == "c"]
    return SmallSignalNetwork(
        circuit=circuit,
        network=net,
        g=g.matrix(net.size),
        c=c.matrix(net.size),
        capacitors=explicit + device_caps,
        transcaps=trans,
        ac_ground=ac_grounds(circuit),
        gmin=gmin,
    )


def _explicit(e: Element) -> CapacitorRecord:
    return CapacitorRecord(e.name, e.nodes[0], e.nodes[1], float(e.value) * e.params.get("m", 1.0), e.file, e.line, None, e.comment)

