"""Process, voltage and temperature corners: ``--corner NAME:PARAM=VALUE,...``.

A corner overrides global parameters (``vdd=1.62``), may set the temperature
(``temp=125``) and may select a ``.lib`` section (``lib=ss``); each netlist is scanned once per corner and the report shows them
side by side.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field

from tauscan.errors import SettingsError
from tauscan.units import OptionValueError, parse_assignment

_NAME = re.compile(r"[A-Za-z_][A-Za-z0-9_.-]*\Z")


@dataclass(frozen=True)
class Corner:
    name: str
    params: dict = field(default_factory=dict)
    temp_c: float | None = None
    #: a ``.lib`` section: replaces the section of the netlist's ``.lib FILE SECTION`` cards
    #: whose file has a section of this name (``tt`` -> ``ss``)
    lib: str | None = None


def parse_corner(text: str) -> Corner:
    """``NAME:PARAM=VALUE,...`` -> a Corner (values take SPICE suffixes; ``temp`` is in Celsius)."""
    name, sep, body = text.partition(":")
    name = name.strip()
    if not sep or not _NAME.match(name):
        raise SettingsError(f"--corner expects NAME:PARAM=VALUE[,PARAM=VALUE...], not {text!r}")
    params: dict[str, float] = {}
    temp = None
    lib = None
    for item in filter(None, (x.strip() for x in body.split(","))):
        key, eq, raw = item.partition("=")
        if eq and key.strip().lower() == "lib":
            lib = check_section(raw.strip(), f"--corner {name}")
            continue
        try:
            pair = parse_assignment(item)
        except OptionValueError as exc:
            raise SettingsError(f"--corner {name}: {exc}") from None
        if pair is None:
            raise SettingsError(f"--corner {name}: {item!r} is not PARAM=VALUE with a number")
        key, value = pair
        if key == "temp":
            temp = value
        else:
            params[key] = value
    if not params and temp is None and lib is None:
        raise SettingsError(f"--corner {name}: give at least one PARAM=VALUE")
    return Corner(name.lower(), params, temp, lib)


def check_section(raw: str, what: str, path: str | None = None, line: int | None = None) -> str:
    """A ``.lib`` section name as a corner gives it (a plain word)."""
    if not _NAME.match(raw):
        raise SettingsError(f"{what}: lib={raw!r} is not a .lib section name", path, line)
    return raw.lower()
