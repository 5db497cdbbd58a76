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


#: Letters that may follow a number as a unit, with no scale suffix before them (``5V``,
#: ``10ohm``, ``1e3Hz``); anything else that is not a scale suffix is reported.
UNIT_LETTERS = frozenset(["v", "a", "s", "hz", "ohm", "ohms", "h", "db", "deg", "w", "sec"])


def unknown_suffix(text: str) -> str | None:
    """The letters after a number when they are neither a scale suffix (with a unit after it)
    nor a unit alone: ``100x`` gives ``"x"``, ``10pF``, ``5V`` and ``1meg`` give None."""
    match = _NUMBER.match(text)
    if match is None:
        return None
    letters = match.group(2).lower()
    if not letters or letters[0] in _SCALE or letters.startswith(("meg", "mil")) or letters in UNIT_LETTERS:
        return None
    return letters


def parse_number_x_mega(text: str) -> float | None:
    """:func:`parse_number` in the dialect that reads ``x`` as mega (``100x`` is 1e8)."""
    match = _NUMBER.match(text)
    if match is not None and match.group(2)[:1].lower() == "x":
        return float(f"{match.group(1)}e6") if "e" not in match.group(1).lower() else float(match.group(1)) * 1e6
    return parse_number(text)


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
    if unit == "Hz" and magnitude < 0.9995:
        # below 1 Hz in plain decimals: 'mHz' beside 'MHz' is too easily misread
        return f"{value:.{digits}g} Hz"
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


_OPTION_NUMBER = re.compile(r"\s*([+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)\s*([A-Za-z\u00b5]*)\s*\Z")
#: SI prefixes before a unit, case-sensitive (M mega, m milli)
_SI = {"T": 12, "G": 9, "M": 6, "k": 3, "K": 3, "": 0, "m": -3, "u": -6, "\u00b5": -6, "n": -9, "p": -12,
       "f": -15, "a": -18}


class OptionValueError(ValueError):
    """A value an option or a setting gives that tauscan will not guess at."""


def parse_option_value(text: str, unit: str = "") -> float:
    """A number that an option or a setting gives (not a netlist's): SPICE style (``10meg``,
    ``100k``, ``2.5e6``) or SI with its unit (``10MHz``, ``10 kHz``, ``100mHz``), strictly.

    The netlist reader follows SPICE and drops letters it does not know (``10pF``); an
    option is where a threshold is set, so nothing is dropped: a bare ``M`` (milli to SPICE,
    mega to everyone else) and a suffix that would be ignored (``1x``, ``50kk``) are refused
    with :class:`OptionValueError`, whose message shows both spellings.

    >>> parse_option_value("10MHz", "Hz"), parse_option_value("10meg", "Hz"), parse_option_value("100mHz", "Hz")
    (10000000.0, 10000000.0, 0.1)
    """
    match = _OPTION_NUMBER.match(text)
    if match is None:
        raise OptionValueError(f"{text!r} is not a number")
    mantissa, letters = match.groups()
    digits, _, exponent = mantissa.lower().partition("e")

    def scaled(shift: int) -> float:
        return float(f"{digits}e{int(exponent or 0) + shift}")

    hint = (f"write {mantissa}meg or {mantissa}M{unit} for mega, {mantissa}m or {mantissa}m{unit} for milli" if unit
            else f"write {mantissa}meg for mega, {mantissa}m for milli")
    if unit and letters.lower().endswith(unit.lower()) and len(letters) >= len(unit):
        prefix = letters[: len(letters) - len(unit)]
        if prefix.lower() == "meg":
            return scaled(6)
        if prefix in _SI:
            return scaled(_SI[prefix])
        raise OptionValueError(f"{text!r}: {prefix!r} is not an SI prefix ({hint})")
    if not unit:  # a unit word after the scale, as netlists write them (10pF, 3kohm, 1.8V)
        for word in _UNIT_WORDS:
            if letters.lower().endswith(word) and len(letters) > len(word):
                letters = letters[: len(letters) - len(word)]
                break
            if letters.lower() == word and word not in _SCALE:
                letters = ""
                break
    low = letters.lower()
    if low == "meg":
        return scaled(6)
    if letters == "M":
        raise OptionValueError(f"{text!r} is ambiguous: SPICE reads M as milli, SI as mega; {hint}")
    if len(letters) <= 1 and low in _SCALE_ALL:
        return scaled(_SCALE_ALL[low])
    si = f"; SI with the unit {unit}: {mantissa}k{unit}, {mantissa}M{unit}" if unit else ""
    scales = f"SPICE: t g meg k m u n p f a{si}" if unit else "t g meg k m u n p f a"
    raise OptionValueError(f"{text!r}: the suffix {letters!r} is not a scale tauscan reads ({scales})")


_SCALE_ALL = dict(_SCALE, **{"": 0})
#: unit words that may follow a scale in an option's value (longest first)
_UNIT_WORDS = ("ohms", "ohm", "hz", "v", "a", "s", "h", "f")


def parse_assignment(item: str) -> tuple[str, float] | None:
    """``NAME=VALUE`` with a number (:func:`parse_option_value`) -> (lower-case name, value);
    None when it is not an assignment; :class:`OptionValueError` when the value is refused.

    The one parser of the assignments that options and settings take (``--param``,
    ``--corner``); each caller words its own error.
    """
    name, sep, text = item.partition("=")
    if not sep or not name.strip():
        return None
    value = parse_option_value(text)  # OptionValueError says what is wrong with the value
    return name.strip().lower(), value
