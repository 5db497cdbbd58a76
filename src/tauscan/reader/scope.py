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
from tauscan.units import parse_number


class ParamScope:
    """Lazily evaluated parameters with a parent scope and cycle detection."""

    __slots__ = ("raw", "values", "parent", "busy")

    def __init__(self, raw: dict[str, tuple[Field, Card]], parent: "ParamScope | None", values: dict[str, float] | None = None) -> None:
        self.raw = raw
        self.values: dict[str, float] = dict(values or {})
        self.parent = parent
        self.busy: set[str] = set()

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
        value = parse_number(f.text)
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
