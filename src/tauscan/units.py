"""SPICE number syntax at the edge, and engineering notation for printing.

Scale suffixes follow the SPICE2 conventions (Nagel 1975, ERL M520; recalled from
memory): T=1e12, G=1e9, MEG=1e6, K=1e3, MIL=25.4e-6, M=1e-3, U=1e-6, N=1e-9,
P=1e-12, F=1e-15, case-insensitive.  Letters after a number that are not a scale
suffix are ignored (``10pF`` is 10e-12, ``2.2kohm`` is 2200, ``5V`` is 5), and so
are letters after a suffix.  Note the classic trap: ``1F`` is one femtofarad and
``1M`` one milli-unit; mega is ``MEG``.
"""

from __future__ import annotations

import math
import re

_NUMBER = re.compile(r"([+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)([A-Za-z]*)\Z")

#: decimal exponent of each one-letter scale suffix
_SCALE = {"t": 12, "g": 9, "k": 3, "m": -3, "u": -6, "n": -9, "p": -12, "f": -15, "a": -18}

#: parse_number's memo (text -> value, or None for text that is not a number)
_cache: dict[str, float | None] = {}


def parse_number(text: str) -> float | None:
    """The value of a SPICE number, or None when ``text`` is not one.

    >>> parse_number("2.2kohm"), parse_number("1meg"), parse_number("10pF")
    (2200.0, 1000000.0, 1e-11)
    """
    try:
        return _cache[text]
    except KeyError:
        pass
    value = _parse_uncached(text)
    if len(_cache) < 200_000:
        _cache[text] = value
    return value


def _parse_uncached(text: str) -> float | None:
    match = _NUMBER.match(text)
    if match is None:
        return None
    mantissa = match.group(1)
    suffix = match.group(2).lower()
    if not suffix:
        return float(mantissa)
    if suffix.startswith("meg"):
        shift = 6
    elif suffix.startswith("mil"):
        return float(mantissa) * 25.4e-6
    else:
        shift = _SCALE.get(suffix[0], 0)
    if shift == 0:
        return float(mantissa)
    # shift the decimal exponent in the text so that 10p is exactly float("10e-12")
    digits, _, exponent = mantissa.lower().partition("e")
    return float(f"{digits}e{int(exponent or 0) + shift}")


_PREFIXES = [
    (1e12, "T"),
    (1e9, "G"),
    (1e6, "M"),
    (1e3, "k"),
    (1.0, ""),
    (1e-3, "m"),
    (1e-6, "u"),
    (1e-9, "n"),
    (1e-12, "p"),
    (1e-15, "f"),
    (1e-18, "a"),
]


def eng(value: float | None, unit: str = "", digits: int = 3) -> str:
    """Engineering notation with an SI prefix: ``eng(1.5e-13, 'F') == '150 fF'``.

    ``None`` and non-finite values print as a dash.
    """
    if value is None or not math.isfinite(value):
        return "-"
    if value == 0:
        return f"0 {unit}".rstrip()
    magnitude = abs(value)
    for scale, prefix in _PREFIXES:
        if magnitude >= scale * 0.9995:
            break
    else:
        scale, prefix = _PREFIXES[-1]
    scaled = value / scale
    text = f"{scaled:.{digits}g}"
    if "e" in text:  # out of the prefix range
        return f"{value:.{digits}g} {unit}".rstrip()
    if not unit:
        return f"{text}{prefix}"
    return f"{text} {prefix}{unit}"


def parse_assignment(item: str) -> tuple[str, float] | None:
    """``NAME=VALUE`` with a SPICE number -> (lower-case name, value); None when it is not one.

    The one parser of the assignments that options and settings take (``--param``,
    ``--corner``); each caller words its own error.
    """
    name, sep, text = item.partition("=")
    value = parse_number(text.strip()) if sep else None
    if not sep or not name.strip() or value is None:
        return None
    return name.strip().lower(), value
