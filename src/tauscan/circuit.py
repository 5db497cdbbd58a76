"""The flat circuit: what the reader produces and every later stage reads.

All values are floats in SI units; names are lower case and hierarchical
(instance path first, joined with '.').  Ground is node ``"0"``.
"""

from __future__ import annotations

from dataclasses import dataclass, field

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
    the controlling voltage source of F/H and the inductors of K.
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


@dataclass
class Circuit:
    """A flat, fully evaluated circuit."""

    title: str
    file: str
    elements: list[Element] = field(default_factory=list)
    models: dict[str, Model] = field(default_factory=dict)
    options: dict[str, float | str] = field(default_factory=dict)
    temp_c: float | None = None
    global_nodes: set[str] = field(default_factory=set)
    warnings: list[str] = field(default_factory=list)

    def element(self, name: str) -> Element:
        for element in self.elements:
            if element.name == name:
                return element
        raise KeyError(name)

    def nodes(self) -> list[str]:
        """Every node name, ground first, then in order of first appearance."""
        seen = {GROUND: None}
        for element in self.elements:
            if element.kind == "k":
                continue
            for node in element.nodes:
                seen.setdefault(node, None)
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
