"""Parameter scopes and the evaluation of a field to a number.

Scope order (the issue's contract): an instance's overrides, then the
subcircuit's defaults and local ``.param`` cards, then the scope of the
instance that placed it, up to the global ``.param`` cards.
"""

from __future__ import annotations

import math

from tauscan.errors import ExpressionError, NetlistSyntaxError, TauscanError
from tauscan.reader.expr import evaluate
from tauscan.reader.fields import Braced, Field, Quoted, Word
from tauscan.reader.lines import Card
from tauscan.units import parse_number, parse_number_x_mega, unknown_suffix


class ReadContext:
    """What every scope of one reading shares: the number dialect and the warnings about
    numbers (each located, each said once)."""

    __slots__ = ("x_mega", "warnings", "said")

    def __init__(self, x_mega: bool = False) -> None:
        #: read ``x`` after a number as mega (a dialect of some simulators)
        self.x_mega = x_mega
        self.warnings: list[str] = []
        self.said: set[tuple[str, int, str]] = set()

    def number(self, text: str, card, offset: int) -> float | None:
        """The number a word writes, None when it is not one; letters after it that are no
        scale suffix and no unit are a warning (located at ``offset`` of ``card``)."""
        value = parse_number_x_mega(text) if self.x_mega else parse_number(text)
        if value is not None:
            letters = unknown_suffix(text)
            if letters is not None and not (self.x_mega and letters[0] == "x"):
                self._unknown(text, letters, value, card, offset)
        return value

    def _unknown(self, text: str, letters: str, value: float, card, offset: int) -> None:
        err = card.error(NetlistSyntaxError, "", offset)
        key = (err.file or "", err.line or 0, text)
        if key in self.said:
            return
        self.said.add(key)
        hint = " (--x-mega, or x-mega = true in the settings, reads 'x' as mega)" if letters[0] == "x" else ""
        self.warnings.append(f"{err.where()}: {text!r} is read as {value:g}: {letters!r} is not a scale suffix "
                             f"(T G MEG K M U N P F A) nor a unit, and was dropped{hint}")


class ParamScope:
    """Lazily evaluated parameters with a parent scope and cycle detection."""

    __slots__ = ("raw", "values", "parent", "busy", "context")

    def __init__(self, raw: dict[str, tuple[Field, Card]], parent: "ParamScope | None", values: dict[str, float] | None = None,
                 context: ReadContext | None = None) -> None:
        self.raw = raw
        self.values: dict[str, float] = dict(values or {})
        self.parent = parent
        self.busy: set[str] = set()
        self.context = context or (parent.context if parent is not None else ReadContext())

    def get(self, name: str) -> float:
        scope: ParamScope | None = self
        while scope is not None:
            value = scope.values.get(name)
            if value is not None:
                return value
            if name in scope.raw:
                return scope._resolve(name)
            scope = scope.parent
        raise KeyError(name)

    def _resolve(self, name: str) -> float:
        value_field, card = self.raw[name]
        if name in self.busy:
            raise card.error(ExpressionError, f"parameter {name!r} depends on itself (a parameter cycle)", value_field.offset)
        self.busy.add(name)
        try:
            value = field_value(value_field, card, self)
        finally:
            self.busy.discard(name)
        self.values[name] = value
        return value


def field_value(f: Field, card: Card, scope: ParamScope) -> float:
    """The number a value field stands for, evaluated in ``scope``."""
    offset = f.offset
    if type(f) is Word:
        value = scope.context.number(f.text, card, offset)
        if value is not None:
            if not math.isfinite(value):
                raise card.error(NetlistSyntaxError, f"value {f.text!r} is out of range", offset)
            return value
        text = f.text
    elif type(f) in (Braced, Quoted):
        text = f.text
    else:
        raise card.error(NetlistSyntaxError, "expected a value here", offset)
    try:
        return evaluate(text, scope.get)
    except KeyError as exc:
        raise card.error(ExpressionError, f"undefined parameter {exc.args[0]!r}", offset) from None
    except TauscanError as exc:
        if exc.file is not None:
            raise
        col = exc.col if isinstance(exc.col, int) else 0
        raise card.error(type(exc), exc.message, offset + col) from None
