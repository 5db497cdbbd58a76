"""The flat circuit: what the reader produces and every later stage reads.

All values are floats in SI units; names are lower case and hierarchical
(instance path first, joined with '.').  Ground is node ``"0"``.
"""

from __future__ import annotations

from array import array
from collections.abc import Iterator, Sequence
from dataclasses import dataclass, field
from itertools import chain, repeat

import numpy as np

GROUND = "0"

#: Element letters the reader accepts, and what each is.
ELEMENT_KINDS = {
    "r": "resistor",
    "c": "capacitor",
    "l": "inductor",
    "k": "coupling",
    "v": "voltage source",
    "i": "current source",
    "e": "voltage-controlled voltage source",
    "f": "current-controlled current source",
    "g": "voltage-controlled current source",
    "h": "current-controlled voltage source",
    "d": "diode",
    "q": "bipolar transistor",
    "m": "MOSFET",
    "x": "subcircuit instance",
}


@dataclass(slots=True)
class Waveform:
    """A transient source function, parsed and kept (the operating point uses the DC value)."""

    kind: str
    args: tuple[float, ...]

    def value_at_zero(self) -> float:
        """Value at t = 0: the first level of PULSE/EXP/PWL, the offset of SIN."""
        if not self.args:
            return 0.0
        if self.kind == "pwl":
            return self.args[1] if len(self.args) > 1 else 0.0
        return self.args[0]


@dataclass(slots=True)
class SourceSpec:
    """DC, AC and transient parts of an independent source."""

    dc: float = 0.0
    dc_given: bool = False
    ac_mag: float = 0.0
    ac_phase: float = 0.0
    waveform: Waveform | None = None


@dataclass(slots=True)
class Element:
    """One flat circuit element.

    ``value`` is the principal value (ohms, farads, henries, the source's DC
    value, a controlled source's gain or a coupling factor); ``control`` names
    the controlling voltage source of F/H and the inductors of K.  ``params`` is read-only:
    MOSFET lines whose parameters read the same share one dictionary (a big extracted netlist
    repeats a few geometries thousands of times).
    """

    name: str
    kind: str
    nodes: tuple[str, ...]
    value: float | None
    model: str | None
    params: dict[str, float]
    file: str
    line: int
    source: SourceSpec | None = None
    control: tuple[str, ...] = ()
    comment: str = ""
    #: how many rows of the circuit's table of plain passives come before it in the flat circuit
    rows_before: int = 0

    def to_json(self) -> dict:
        out = {
            "name": self.name,
            "nodes": list(self.nodes),
            "value": self.value,
            "model": self.model,
            "params": dict(self.params),
            "file": self.file,
            "line": self.line,
        }
        if self.source is not None:
            src = self.source
            out["source"] = {
                "dc": src.dc,
                "ac_mag": src.ac_mag,
                "ac_phase": src.ac_phase,
                "waveform": None if src.waveform is None else {"kind": src.waveform.kind, "args": list(src.waveform.args)},
            }
        if self.control:
            out["control"] = list(self.control)
        return out


@dataclass(slots=True)
class Model:
    """A ``.model`` card: its type (nmos, pmos, npn, pnp, d, ...) and parameters."""

    name: str
    type: str
    params: dict[str, float]
    file: str
    line: int


@dataclass
class PassiveTable:
    """Plain two-terminal resistors and capacitors in columns, one row each.

    A plain line (``Rname a b value`` or ``Cname a b value``, nothing else on it) is the
    bulk of an extracted netlist; keeping its fields in columns, with no object per
    element, is what makes a 10^6-line netlist quick to read and to stamp.  Rows are in
    the order of the flat circuit; where the other elements stand between them is kept by
    each element (:attr:`Element.rows_before`).
    """

    kinds: list[str] = field(default_factory=list)  # "r" or "c"
    names: list[str] = field(default_factory=list)
    a: list[str] = field(default_factory=list)
    b: list[str] = field(default_factory=list)
    values: list[float] = field(default_factory=list)
    files: list[str] = field(default_factory=list)
    #: machine integers, not a list: no object per row
    lines: array = field(default_factory=lambda: array("q"))

    def __len__(self) -> int:
        return len(self.names)

    def element(self, k: int) -> Element:
        """Row ``k`` as an :class:`Element` (made on demand, for reports and look-ups)."""
        return Element(self.names[k], self.kinds[k], (self.a[k], self.b[k]), self.values[k], None, {},
                       self.files[k], self.lines[k], rows_before=k)

    def rows_of(self, kind: str) -> np.ndarray:
        """Indices of the rows of one kind (``"r"`` or ``"c"``)."""
        if not self.kinds:
            return np.zeros(0, dtype=np.int64)
        return np.flatnonzero(np.fromiter(map(kind.__eq__, self.kinds), dtype=bool, count=len(self.kinds)))


class ElementView(Sequence):
    """Every element of a circuit in order, the table rows made into objects as they are met
    (for listings, JSON and tests; the numerical stages read the columns instead)."""

    def __init__(self, circuit: "Circuit") -> None:
        self._circuit = circuit

    def __len__(self) -> int:
        return len(self._circuit.general) + len(self._circuit.passives)

    def __iter__(self) -> Iterator[Element]:
        general = self._circuit.general
        table = self._circuit.passives
        if not len(table):
            yield from general
            return
        row = 0
        for e in general:
            for k in range(row, e.rows_before):
                yield table.element(k)
            row = max(row, e.rows_before)
            yield e
        for k in range(row, len(table)):
            yield table.element(k)

    def __getitem__(self, index):
        return list(self)[index]


@dataclass
class Circuit:
    """A flat, fully evaluated circuit: the elements with an object each (:attr:`general`)
    and the plain resistors and capacitors in columns (:attr:`passives`)."""

    title: str
    file: str
    general: list[Element] = field(default_factory=list)
    passives: PassiveTable = field(default_factory=PassiveTable)
    models: dict[str, Model] = field(default_factory=dict)
    options: dict[str, float | str] = field(default_factory=dict)
    temp_c: float | None = None
    global_nodes: set[str] = field(default_factory=set)
    warnings: list[str] = field(default_factory=list)
    #: overrides (--param, a corner) naming no .param of the netlist: name -> the message
    unknown_params: dict[str, str] = field(default_factory=dict)

    @property
    def elements(self) -> ElementView:
        """Every element in order, as objects (see :class:`ElementView`)."""
        return ElementView(self)

    def find(self, name: str) -> Element | None:
        """The element of that (lower-case, hierarchical) name, or None."""
        index = self._index()
        k = index.get(name)
        if k is None:
            return None
        return self.general[k] if k >= 0 else self.passives.element(-k - 1)

    def element(self, name: str) -> Element:
        """The element of that name (``KeyError`` when there is none)."""
        found = self.find(name)
        if found is None:
            raise KeyError(name)
        return found

    def _index(self) -> dict[str, int]:
        """Name -> position in :attr:`general` (k >= 0) or table row r (as -r - 1), made on
        the first look-up, once the reader is done with the circuit."""
        index = self.__dict__.get("_by_name")
        if index is None or len(index) != len(self.general) + len(self.passives):
            index = {name: -k - 1 for k, name in enumerate(self.passives.names)}
            index.update((e.name, k) for k, e in enumerate(self.general))
            self.__dict__["_by_name"] = index
        return index

    def nodes(self) -> list[str]:
        """Every node name, ground first, then in order of first appearance."""
        seen: dict[str, None] = {GROUND: None}
        table = self.passives
        row = 0
        for e in self.general:
            end = e.rows_before
            if end > row:
                seen.update(zip(chain.from_iterable(zip(table.a[row:end], table.b[row:end])), repeat(None)))
                row = end
            if e.kind != "k":
                seen.update(zip(e.nodes, repeat(None)))
        if row < len(table):
            seen.update(zip(chain.from_iterable(zip(table.a[row:], table.b[row:])), repeat(None)))
        return list(seen)

    def to_json(self) -> dict:
        return {
            "title": self.title,
            "elements": [e.to_json() for e in self.elements],
            "models": {m.name: {"type": m.type, "params": dict(m.params)} for m in self.models.values()},
            "options": dict(self.options),
            "temp": self.temp_c,
            "warnings": list(self.warnings),
        }
