"""Element cards -> flat :class:`~tauscan.circuit.Element` records, one rule per letter.

Each rule receives the positional fields (after the element name), the
``key=value`` fields and a frame that maps nodes, evaluates values and finds
models in the instance being expanded.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Protocol

from tauscan.circuit import Element, SourceSpec, Waveform
from tauscan.errors import NetlistSyntaxError, TauscanError, did_you_mean
from tauscan.reader.fields import VALUE_TYPES, Field, Group, Param, Word, show
from tauscan.reader.lines import Card, PlainValueCard

WAVEFORMS = frozenset(["pulse", "sin", "pwl", "exp", "sffm", "am"])
_SOURCE_WORDS = WAVEFORMS | {"dc", "ac"}


def _valueish(f: Field) -> bool:
    """A field that can stand for a value in a source card (not one of its keywords)."""
    return isinstance(f, VALUE_TYPES) and (type(f) is not Word or f.text.lower() not in _SOURCE_WORDS)


class Frame(Protocol):
    prefix: str

    def node(self, raw: str) -> str: ...
    def value(self, f: Field, card: Card) -> float: ...
    def model(self, raw: str, instance: dict[str, float] | None = None) -> str | None: ...


def _need(pos: list[Field], count: int, card: Card, what: str) -> None:
    if len(pos) >= count and all(type(f) is Word for f in pos[:count]):
        return
    if len(pos) < count:
        offset = pos[-1].offset + len(show(pos[-1])) if pos else len(card.text.split()[0])
        raise card.error(NetlistSyntaxError, f"missing {what}", offset)
    for f in pos[:count]:
        if type(f) is not Word:
            raise card.error(NetlistSyntaxError, f"expected a node name here ({what})", f.offset)


def _nodes(pos: list[Field], count: int, frame: Frame) -> tuple[str, ...]:
    node = frame.node
    return tuple([node(f.text) for f in pos[:count]])


def _params(params: list[Field], card: Card, frame: Frame) -> dict[str, float]:
    if not params:
        return {}
    return {f.key: frame.value(f.value, card) for f in params}


def _extra(pos: list[Field], start: int, card: Card) -> None:
    if len(pos) > start:
        f = pos[start]
        raise card.error(NetlistSyntaxError, f"unexpected field {show(f)!r}", f.offset)


_PASSIVE_UNIT = {"r": "resistance", "c": "capacitance", "l": "inductance"}
_PASSIVE_KEYS = {"r": ("r", "value", "res"), "c": ("c", "value", "cap"), "l": ("l", "value", "ind")}


def check_passive_value(letter: str, value: float, card: Card | PlainValueCard, offset: int) -> None:
    """A resistance of zero and a negative capacitance are errors (at ``offset`` in the card)."""
    if letter == "r" and value == 0:
        raise card.error(NetlistSyntaxError, "zero resistance; use a small value or join the nodes", offset)
    if letter == "c" and value < 0:
        raise card.error(NetlistSyntaxError, "negative capacitance", offset)


def passive(letter: str, name: str, pos: list[Field], params: list[Field], card: Card, frame: Frame) -> Element:
    """R, C, L: two nodes and a value (positional, or ``r=``/``c=``/``l=``/``value=``)."""
    unit = _PASSIVE_UNIT[letter]
    if len(pos) < 2 or type(pos[0]) is not Word or type(pos[1]) is not Word:
        _need(pos, 2, card, "the two nodes")
    values = _params(params, card, frame) if params else {}
    model = None
    if len(pos) >= 3 and isinstance(pos[2], VALUE_TYPES):
        value = frame.value(pos[2], card)
        _extra(pos, 3, card)
    else:
        for key in _PASSIVE_KEYS[letter]:
            if key in values:
                value = values.pop(key)
                break
        else:
            raise card.error(NetlistSyntaxError, f"missing {unit} value", len(card.text.rstrip()))
        _extra(pos, 2, card)
    check_passive_value(letter, value, card, pos[2].offset if len(pos) > 2 else 0)
    node = frame.node
    return Element(name, letter, (node(pos[0].text), node(pos[1].text)), value, model, values, card.file, card.line, None, (), card.comment)


def _waveform(kind: str, group: Group, card: Card, frame: Frame) -> Waveform:
    args = tuple(frame.value(f, card) for f in group.items if type(f) is not Param)
    return Waveform(kind, args)


def source(letter: str, name: str, pos: list[Field], params: list[Field], card: Card, frame: Frame) -> Element:
    """V, I: two nodes, then ``[DC] value``, ``AC [mag [phase]]`` and a transient function, in
    the forms simulators accept: ``dc 1``, ``DC=VCM``, ``ac 1 0``, ``AC=0.5 90``, ``AC=1,0``,
    ``SIN(0 1 1k)`` and ``SIN 0 1 1k``.  ``pos`` holds every field after the name, in order
    (``key=value`` fields among them)."""
    fields = pos
    nodes = [f for f in fields[:2] if type(f) is not Param]
    _need(nodes, 2, card, "the two nodes")
    spec = SourceSpec()
    values: dict[str, float] = {}
    i = 2
    count = len(fields)

    def value_at(k: int) -> bool:
        return k < count and _valueish(fields[k])

    ac_done = False  # an AC magnitude and phase were read: a bare value after them is refused

    def ac_from(k: int) -> int:
        """The phase after an AC magnitude (at ``k``, if any); the index after them."""
        nonlocal ac_done
        if value_at(k):
            spec.ac_phase = frame.value(fields[k], card)
            k += 1
            ac_done = True
        return k

    while i < count:
        f = fields[i]
        if type(f) is Param:
            if f.key == "dc":
                spec.dc, spec.dc_given = frame.value(f.value, card), True
                i += 1
            elif f.key == "ac":
                spec.ac_mag = frame.value(f.value, card)
                i = ac_from(i + 1)
            elif f.key in WAVEFORMS:
                raise card.error(NetlistSyntaxError, f"{f.key.upper()} takes its arguments after it, not '='", f.offset)
            else:
                values[f.key] = frame.value(f.value, card)
                i += 1
            continue
        word = f.text.lower() if type(f) is Word else ""
        if word == "dc" and value_at(i + 1):
            spec.dc = frame.value(fields[i + 1], card)
            spec.dc_given = True
            i += 2
        elif word == "ac":
            spec.ac_mag = 1.0
            i += 1
            if value_at(i):
                spec.ac_mag = frame.value(fields[i], card)
                i = ac_from(i + 1)
        elif word in WAVEFORMS and i + 1 < count and type(fields[i + 1]) is Group:
            spec.waveform = _waveform(word, fields[i + 1], card, frame)
            i += 2
        elif word in WAVEFORMS:  # the arguments without parentheses: the values that follow
            k = i + 1
            while value_at(k):
                k += 1
            if k == i + 1:
                raise card.error(NetlistSyntaxError, f"{word.upper()} needs its arguments", f.offset)
            spec.waveform = Waveform(word, tuple(frame.value(a, card) for a in fields[i + 1 : k]))
            i = k
        elif _valueish(f) and not spec.dc_given and not ac_done:
            spec.dc = frame.value(f, card)
            spec.dc_given = True
            i += 1
        elif _valueish(f) and ac_done:
            raise card.error(NetlistSyntaxError, f"a value {show(f)!r} after the AC magnitude and phase: write the DC "
                             "value first, or as DC=", f.offset)
        else:
            raise card.error(NetlistSyntaxError, f"unexpected field {show(f)!r} in a source", f.offset)
    if not spec.dc_given and spec.waveform is not None:
        spec.dc = spec.waveform.value_at_zero()
    return Element(name, letter, _nodes(nodes, 2, frame), spec.dc, None, values, card.file, card.line, spec, comment=card.comment)


def voltage_controlled(letter: str, name: str, pos: list[Field], params: list[Field], card: Card, frame: Frame) -> Element:
    """E, G: output nodes, controlling nodes, gain."""
    _behavioural(pos, params, card)
    _need(pos, 4, card, "the output and controlling nodes")
    values = _params(params, card, frame)
    if len(pos) >= 5 and isinstance(pos[4], VALUE_TYPES):
        gain = frame.value(pos[4], card)
        _extra(pos, 5, card)
    elif "gain" in values or "gm" in values:
        gain = values.pop("gain", None) or values.pop("gm")
        _extra(pos, 4, card)
    else:
        raise card.error(NetlistSyntaxError, "missing gain", len(card.text.rstrip()))
    return Element(name, letter, _nodes(pos, 4, frame), gain, None, values, card.file, card.line, comment=card.comment)


def current_controlled(letter: str, name: str, pos: list[Field], params: list[Field], card: Card, frame: Frame) -> Element:
    """F, H: output nodes, controlling voltage source, gain."""
    _behavioural(pos, params, card)
    _need(pos, 3, card, "the output nodes and the controlling source")
    if len(pos) < 4 or not isinstance(pos[3], VALUE_TYPES):
        raise card.error(NetlistSyntaxError, "missing gain", len(card.text.rstrip()))
    gain = frame.value(pos[3], card)
    _extra(pos, 4, card)
    control = (frame.prefix + pos[2].text.lower(),)
    return Element(name, letter, _nodes(pos, 2, frame), gain, None, _params(params, card, frame), card.file, card.line, control=control, comment=card.comment)


def _behavioural(pos: list[Field], params: list[Field], card: Card) -> None:
    for f in pos:
        if type(f) is Word and f.text.lower() in ("poly", "table", "laplace", "cur", "vol"):
            raise card.error(NetlistSyntaxError, f"{f.text.upper()} controlled sources are not supported; use a linear gain", f.offset)
    for f in params:
        if f.key in ("value", "table", "laplace"):
            raise card.error(NetlistSyntaxError, "behavioural sources are not supported; use a linear gain", f.offset)


def coupling(letter: str, name: str, pos: list[Field], params: list[Field], card: Card, frame: Frame) -> Element:
    """K: two inductors and the coupling factor (kept; it does not enter the DC point)."""
    _need(pos, 2, card, "the two inductors")
    if len(pos) < 3 or not isinstance(pos[2], VALUE_TYPES):
        raise card.error(NetlistSyntaxError, "missing coupling factor", len(card.text.rstrip()))
    k = frame.value(pos[2], card)
    control = tuple(frame.prefix + f.text.lower() for f in pos[:2])
    return Element(name, "k", (), k, None, _params(params, card, frame), card.file, card.line, control=control, comment=card.comment)


def _model(frame: Frame, f: Field, values: dict[str, float], card: Card) -> str | None:
    """The flat model an element's model field names (a bin of it chosen by ``values``)."""
    try:
        return frame.model(f.text, values)
    except TauscanError as exc:
        if exc.file is not None:
            raise
        raise card.error(type(exc), exc.message, f.offset) from None


def _device(letter: str, name: str, pos: list[Field], params: list[Field], card: Card, frame: Frame, count: int, what: str,
            values: dict[str, float] | None = None) -> Element:
    _need(pos, count + 1, card, f"the {what} nodes and the model")
    if values is None:
        values = _params(params, card, frame)
    model = _model(frame, pos[count], values, card)
    if model is None:
        known = []
        scope = frame.definition
        while scope is not None:
            known.extend(scope.models)
            scope = scope.parent
        raise card.error(NetlistSyntaxError, f"model {pos[count].text!r} is not defined" + did_you_mean(pos[count].text, known),
                         pos[count].offset)
    values = dict(values)
    if len(pos) > count + 1:
        if type(pos[count + 1]) is Word and pos[count + 1].text.lower() == "off":
            values["off"] = 1.0
            _extra(pos, count + 2, card)
        elif isinstance(pos[count + 1], VALUE_TYPES):
            values["area"] = frame.value(pos[count + 1], card)
            _extra(pos, count + 2, card)
        else:
            _extra(pos, count + 1, card)
    return Element(name, letter, _nodes(pos, count, frame), None, model, values, card.file, card.line, comment=card.comment)


def diode(letter: str, name: str, pos: list[Field], params: list[Field], card: Card, frame: Frame) -> Element:
    """D: anode, cathode, model, optional area."""
    return _device(letter, name, pos, params, card, frame, 2, "anode and cathode")


def mosfet(letter: str, name: str, pos: list[Field], params: list[Field], card: Card, frame: Frame) -> Element:
    """M: drain, gate, source, bulk, model, instance parameters."""
    return _device(letter, name, pos, params, card, frame, 4, "drain, gate, source and bulk")


def bipolar(letter: str, name: str, pos: list[Field], params: list[Field], card: Card, frame: Frame) -> Element:
    """Q: collector, base, emitter, optional substrate, model, optional area.

    The fourth word is the model when a model of that name exists, else the
    substrate node (the usual SPICE reading).
    """
    _need(pos, 4, card, "collector, base and emitter nodes and the model")
    values = _params(params, card, frame)
    if len(pos) == 4 or (type(pos[3]) is Word and _model(frame, pos[3], values, card) is not None):
        return _device(letter, name, pos, params, card, frame, 3, "collector, base and emitter", values)
    return _device(letter, name, pos, params, card, frame, 4, "collector, base, emitter and substrate", values)


RULES: dict[str, Callable[..., Element]] = {
    "r": passive,
    "c": passive,
    "l": passive,
    "v": source,
    "i": source,
    "e": voltage_controlled,
    "g": voltage_controlled,
    "f": current_controlled,
    "h": current_controlled,
    "k": coupling,
    "d": diode,
    "q": bipolar,
    "m": mosfet,
}
