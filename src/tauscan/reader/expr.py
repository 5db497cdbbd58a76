"""Parameter expressions: parsed by ``grammar/expr.lark``, evaluated here.

The evaluator walks the parse tree itself.  It never reaches Python's ``eval``
or ``exec``, never looks up attributes by user-given names and never imports:
a name in an expression is either a parameter, the constant ``pi`` or one of
the functions in :data:`FUNCTIONS`.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from functools import lru_cache

from lark import Token, Tree
from lark.exceptions import UnexpectedInput

from tauscan.errors import ExpressionError
from tauscan.reader.grammar import expression_parser
from tauscan.units import parse_number

#: Deepest parenthesis / operator nesting we evaluate (beyond it: an error, not a crash).
MAX_NESTING = 200


def _sgn(x: float) -> float:
    return float((x > 0) - (x < 0))


def _log(x: float) -> float:
    if x <= 0:
        raise ValueError("logarithm of a value that is not positive")
    return math.log(x)


def _log10(x: float) -> float:
    if x <= 0:
        raise ValueError("logarithm of a value that is not positive")
    return math.log10(x)


def _sqrt(x: float) -> float:
    if x < 0:
        raise ValueError("square root of a negative value")
    return math.sqrt(x)


def _pow(x: float, y: float) -> float:
    if x == 0 and y < 0:
        raise ZeroDivisionError("zero to a negative power")
    if x < 0 and y != int(y):
        raise ValueError("negative value to a fractional power")
    return math.pow(x, y)


def _nominal(*args: float) -> float:
    """A statistical function's nominal value: its first argument (no Monte-Carlo draw)."""
    return args[0]


#: Statistical functions of PDK libraries (``agauss(nominal, absolute variation, sigmas)``,
#: ``gauss(nominal, relative variation, sigmas)``, ``aunif(nominal, absolute variation)``,
#: ``unif(nominal, relative variation)``, ``limit(nominal, variation)``, each with an optional
#: multiplier, as the HSPICE-style libraries write them; common practice).  tauscan evaluates
#: the nominal case only: each gives its first argument.
STATISTICAL = ("agauss", "gauss", "aunif", "unif", "limit")

#: name -> (function, number of arguments or None for any number >= 1)
FUNCTIONS: dict[str, tuple[Callable[..., float], int | None]] = {
    "sqrt": (_sqrt, 1),
    "exp": (math.exp, 1),
    "log": (_log, 1),  # natural logarithm, as in SPICE
    "ln": (_log, 1),
    "log10": (_log10, 1),
    "abs": (abs, 1),
    "min": (min, None),
    "max": (max, None),
    "pow": (_pow, 2),
    "pwr": (_pow, 2),
    "sin": (math.sin, 1),
    "cos": (math.cos, 1),
    "tan": (math.tan, 1),
    "atan": (math.atan, 1),
    "sinh": (math.sinh, 1),
    "cosh": (math.cosh, 1),
    "tanh": (math.tanh, 1),
    "floor": (lambda x: float(math.floor(x)), 1),
    "ceil": (lambda x: float(math.ceil(x)), 1),
    "int": (lambda x: float(math.trunc(x)), 1),
    "sgn": (_sgn, 1),
    "sign": (_sgn, 1),
    "asin": (math.asin, 1),
    "acos": (math.acos, 1),
    **{name: (_nominal, None) for name in STATISTICAL},
}

CONSTANTS = {"pi": math.pi}

_COMPARE = {
    "==": lambda a, b: a == b,
    "!=": lambda a, b: a != b,
    "<": lambda a, b: a < b,
    ">": lambda a, b: a > b,
    "<=": lambda a, b: a <= b,
    ">=": lambda a, b: a >= b,
}


def _nesting(text: str) -> int:
    depth = best = 0
    for ch in text:
        if ch == "(":
            depth += 1
            best = max(best, depth)
        elif ch == ")":
            depth -= 1
    return best


_BRACES = str.maketrans("{}", "()")


def _as_parentheses(text: str) -> str:
    """Braces, and pairs of quotes, inside an expression read as parentheses (libraries write
    ``{"-a-b/2"}`` and ``{x} + y``); the length stays, so columns hold."""
    text = text.translate(_BRACES)
    if "'" not in text and '"' not in text:
        return text
    out = list(text)
    opening = True
    for i, ch in enumerate(text):
        if ch in "'\"":
            out[i] = "(" if opening else ")"
            opening = not opening
    return "".join(out)


@lru_cache(maxsize=65536)
def parse_expression(text: str) -> Tree | Token:
    """Parse tree of an expression (cached: netlists repeat the same ones)."""
    if "{" in text or "'" in text or '"' in text:
        text = _as_parentheses(text)
    if _nesting(text) > MAX_NESTING or text.count("-") > 4 * MAX_NESTING:
        raise ExpressionError(f"expression nested deeper than {MAX_NESTING} levels")
    try:
        return expression_parser().parse(text)
    except UnexpectedInput as exc:
        pos = getattr(exc, "pos_in_stream", None) or 0
        near = text[pos : pos + 12] or "the end"
        err = ExpressionError(f"cannot read the expression near {near!r}")
        err.col = pos
        raise err from None


def evaluate(text: str, lookup: Callable[[str], float]) -> float:
    """Value of expression ``text``; ``lookup(name)`` gives a parameter's value.

    ``lookup`` raises KeyError for an unknown name.  Every failure is an
    :class:`ExpressionError` (without location: the caller adds it).
    """
    tree = parse_expression(text)
    try:
        value = _eval(tree, lookup)
    except RecursionError:
        raise ExpressionError(f"expression nested deeper than {MAX_NESTING} levels") from None
    except ZeroDivisionError:
        raise ExpressionError(f"division by zero in {text!r}") from None
    except OverflowError:
        raise ExpressionError(f"numeric overflow in {text!r}") from None
    except ValueError as exc:
        raise ExpressionError(f"{exc} in {text!r}") from None
    if not math.isfinite(value):
        raise ExpressionError(f"{text!r} is not a finite number")
    return value


def names_in(text: str) -> set[str]:
    """Parameter names an expression refers to (functions and constants excluded)."""
    tree = parse_expression(text)
    found: set[str] = set()
    stack = [tree]
    while stack:
        node = stack.pop()
        if isinstance(node, Tree):
            if node.data == "name":
                found.add(str(node.children[0]).lower())
            else:
                stack.extend(c for c in node.children if isinstance(c, Tree))
    return found - set(CONSTANTS)


def _eval(node, lookup: Callable[[str], float]) -> float:
    kind = node.data
    ch = node.children
    if kind == "number":
        value = parse_number(str(ch[0]))
        if value is None:
            raise ValueError(f"{str(ch[0])!r} is not a number")
        if not math.isfinite(value):
            raise OverflowError()
        return value
    if kind == "name":
        name = str(ch[0]).lower()
        if name in CONSTANTS:
            return CONSTANTS[name]
        return lookup(name)
    if kind == "add":
        return _eval(ch[0], lookup) + _eval(ch[1], lookup)
    if kind == "sub":
        return _eval(ch[0], lookup) - _eval(ch[1], lookup)
    if kind == "mul":
        return _eval(ch[0], lookup) * _eval(ch[1], lookup)
    if kind == "div":
        den = _eval(ch[1], lookup)
        if den == 0:
            raise ZeroDivisionError()
        return _eval(ch[0], lookup) / den
    if kind == "neg":
        return -_eval(ch[0], lookup)
    if kind == "pow":
        return _pow(_eval(ch[0], lookup), _eval(ch[2], lookup))
    if kind == "compare":
        return float(_COMPARE[str(ch[1])](_eval(ch[0], lookup), _eval(ch[2], lookup)))
    if kind == "cond":
        return _eval(ch[1], lookup) if _eval(ch[0], lookup) != 0 else _eval(ch[2], lookup)
    if kind == "and_":
        return float(_eval(ch[0], lookup) != 0 and _eval(ch[1], lookup) != 0)
    if kind == "or_":
        return float(_eval(ch[0], lookup) != 0 or _eval(ch[1], lookup) != 0)
    if kind == "not_":
        return float(_eval(ch[0], lookup) == 0)
    if kind == "call":
        name = str(ch[0]).lower()
        args = [_eval(a, lookup) for a in ch[1:] if a is not None]
        if name not in FUNCTIONS:
            raise ValueError(f"unknown function {name!r}")
        func, arity = FUNCTIONS[name]
        if (arity is not None and len(args) != arity) or not args:
            raise ValueError(f"{name}() takes {arity or 'one or more'} argument(s), not {len(args)}")
        return float(func(*args))
    raise ValueError(f"cannot evaluate {kind}")
