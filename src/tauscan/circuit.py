"""The flat circuit: what the reader produces and every later stage reads.

All values are floats in SI units; names are lower case and hierarchical
(instance path first, joined with '.').  Ground is node ``"0"``.
"""

from __future__ import annotations

from array import array
from bisect import bisect_right
from collections.abc import Iterable, Iterator, Sequence
from dataclasses import dataclass, field
from itertools import chain, repeat

import numpy as np

GROUND = "0"

#: A MOSFET's channel width and length when its line gives none (metres: SPICE's DEFW and
#: DEFL, recalled from memory), shared by the reader (choosing a bin) and the device models.
DEFAULT_MOS_WIDTH = DEFAULT_MOS_LENGTH = 100e-6

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
    #: the name on its card (``nshort_model.3``), without the instance path of a model
    #: defined inside a subcircuit (empty: the same as ``name``)
    written: str = ""

    @property
    def card_name(self) -> str:
        return self.written or self.name


@dataclass
class PassiveTable:
    """Plain two-terminal resistors and capacitors in columns, one row each.

    A plain line (``Rname a b value`` or ``Cname a b value``, nothing else on it) is the
    bulk of an extracted netlist; keeping its fields in columns, with no object per
    element, is what makes a 10^6-line netlist quick to read and to stamp.  Rows are in
    the order of the flat circuit; where the other elements stand between them is kept by
    each element (kept by the :class:`Circuit`, which alone does that arithmetic).
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
                       self.files[k], self.lines[k])

    def rows_of(self, kind: str) -> np.ndarray:
        """Indices of the rows of one kind (``"r"`` or ``"c"``)."""
        if not self.kinds:
            return np.zeros(0, dtype=np.int64)
        return np.flatnonzero(np.fromiter(map(kind.__eq__, self.kinds), dtype=bool, count=len(self.kinds)))


class ElementView(Sequence):
    """Every element of a circuit in netlist order, the table rows made into objects as they
    are met (for listings, JSON and tests; the numerical stages read the columns instead).
    Indexing is O(log n): a position is mapped to an object element or a table row."""

    def __init__(self, circuit: "Circuit") -> None:
        self._circuit = circuit

    def __len__(self) -> int:
        return len(self._circuit.general) + len(self._circuit.passives)

    def __iter__(self) -> Iterator[Element]:
        circuit = self._circuit
        general = circuit.general
        table = circuit.passives
        if not len(table):
            yield from general
            return
        row = 0
        for e, before in zip(general, circuit._before()):
            for k in range(row, before):
                yield table.element(k)
            row = max(row, before)
            yield e
        for k in range(row, len(table)):
            yield table.element(k)

    def __getitem__(self, index):
        if isinstance(index, slice):
            return [self[i] for i in range(*index.indices(len(self)))]
        size = len(self)
        if index < 0:
            index += size
        if not 0 <= index < size:
            raise IndexError("element index out of range")
        circuit = self._circuit
        positions = circuit._positions()
        k = bisect_right(positions, index) - 1  # object elements at or before the position
        if k >= 0 and positions[k] == index:
            return circuit.general[k]
        return circuit.passives.element(index - (k + 1))


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

    def add(self, element: Element) -> None:
        """Take an element after everything taken so far (table rows included)."""
        self._before().append(len(self.passives))
        self.general.append(element)

    def add_many(self, elements: list[Element], before: Iterable[int]) -> None:
        """Take elements, each after ``before[k]`` rows of the table (rows a reader takes
        together with them; nondecreasing)."""
        self._before().extend(before)
        self.general.extend(elements)

    def _before(self) -> array:
        """Table rows before each object element, made to match :attr:`general` (elements
        given to the constructor, or appended directly, come after every row so far)."""
        before = self.__dict__.get("_rows_before")
        if before is None:
            before = self.__dict__["_rows_before"] = array("q")
        if len(before) < len(self.general):
            before.extend(repeat(len(self.passives), len(self.general) - len(before)))
        return before

    def _positions(self) -> array:
        """Netlist position of every object element (k + table rows before it)."""
        before = self._before()
        cached = self.__dict__.get("_position_cache")
        if cached is None or cached[0] != (len(self.general), len(self.passives)):
            cached = ((len(self.general), len(self.passives)), array("q", map(int.__add__, range(len(before)), before)))
            self.__dict__["_position_cache"] = cached
        return cached[1]

    def first_use(self, node: str) -> Element | None:
        """The first element in netlist order that touches ``node`` (None when none does)."""
        first: tuple[int, Element] | None = None
        for k, e in enumerate(self.general):
            if node in e.nodes:
                first = (self._positions()[k], e)
                break
        table = self.passives
        for column in (table.a, table.b):
            try:
                row = column.index(node)  # a scan in C; a finding or two per run
            except ValueError:
                continue
            before = bisect_right(self._before(), row)  # object elements before the row
            position = row + before
            if first is None or position < first[0]:
                first = (position, table.element(row))
        return None if first is None else first[1]

    def commented(self) -> Iterator[Element]:
        """Elements that carry a comment (a waiver, say), in order; table rows carry none."""
        return (e for e in self.general if e.comment)

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
        for e, end in zip(self.general, self._before()):
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
