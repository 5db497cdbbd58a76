"""Lint settings: ``[tool.tauscan]`` in a pyproject.toml, or a ``tauscan.toml``, found from
the netlist's folder upwards; command-line options override them.

Keys (all optional)::

    min-bandwidth   = "100k"     # bandwidth-floor: octc_hz, or f3db_hz at a given probe
    miller-share    = 0.2        # miller-node: share of the total a node must carry
    miller-threshold = 0.5       # a node is Miller-dominated above this Miller share
    fail-on         = "warning"  # exit 1 on findings at or above: note|warning|error|never
    probe           = "out"      # a node, or "a,b" for v(a) - v(b)
    source          = "vin"
    band            = "auto"     # the mid-band circuit: auto | dc | a frequency such as "10k"
    rank            = "transfer" # rank by transfer time constant, or "octc" (open-circuit)
    include-dirs    = ["models"] # folders searched for .include / .lib files (from this file's folder)
    x-mega          = false      # read an x after a number as mega (100x = 1e8)
    [states]                     # element-name glob = "short" | "open": pinned mid-band states
    [severity]                   # per-rule overrides: "miller-node" = "error"
    [waive]                      # capacitor-name glob = reason
    "ccomp" = "compensation capacitor, Miller by design"

In a pyproject.toml the tables are ``[tool.tauscan]``, ``[tool.tauscan.severity]``,
``[tool.tauscan.waive]`` and ``[tool.tauscan.states]``.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field, replace

from tauscan.errors import SettingsError
from tauscan.lint.findings import SEVERITIES
from tauscan.units import OptionValueError, parse_option_value

try:  # Python 3.11+
    import tomllib
except ModuleNotFoundError:  # pragma: no cover - Python 3.10
    import tomli as tomllib  # type: ignore[no-redef]

KEYS = {"min-bandwidth", "miller-share", "miller-threshold", "fail-on", "probe", "source", "severity", "waive", "corners",
        "band", "rank", "states", "include-dirs", "x-mega"}
RANKS = ("transfer", "octc")


@dataclass(frozen=True)
class LintSettings:
    min_bandwidth: float | None = None
    miller_share: float = 0.2
    miller_threshold: float = 0.5
    fail_on: str = "warning"
    probe: str | None = None
    source: str | None = None
    severity: dict = field(default_factory=dict)
    waive: dict = field(default_factory=dict)  # glob -> reason
    waive_lines: dict = field(default_factory=dict)  # glob -> its line in the settings file
    corners: tuple = ()  # tauscan.corners.Corner, from a [corners] table
    #: ("auto" | "dc" | "fixed", frequency for "fixed")
    band: tuple = ("auto", None)
    rank: str = "transfer"
    #: element-name glob -> "short" | "open"
    states: dict = field(default_factory=dict)
    origin: str | None = None  # the file the settings came from
    #: folders searched for include files (absolute: relative ones are taken from the settings' folder)
    include_dirs: tuple = ()
    x_mega: bool = False  # read an x after a number as mega

    def merged(self, **overrides) -> "LintSettings":
        return replace(self, **{k: v for k, v in overrides.items() if v is not None})


def find_config(start: str) -> str | None:
    """The first tauscan.toml, or pyproject.toml with a [tool.tauscan] table, from ``start`` up."""
    folder = os.path.abspath(start if os.path.isdir(start) else os.path.dirname(start) or ".")
    while True:
        candidate = os.path.join(folder, "tauscan.toml")
        if os.path.isfile(candidate):
            return candidate
        candidate = os.path.join(folder, "pyproject.toml")
        if os.path.isfile(candidate):
            try:
                with open(candidate, "rb") as handle:
                    data = tomllib.load(handle)
            except (OSError, tomllib.TOMLDecodeError):
                data = {}
            if "tauscan" in data.get("tool", {}):
                return candidate
        parent = os.path.dirname(folder)
        if parent == folder:
            return None
        folder = parent


def _line_of(text: str, key: str) -> int | None:
    for number, line in enumerate(text.splitlines(), start=1):
        if line.strip().startswith((key, f'"{key}"', f"'{key}'")):
            return number
    return None


def load(path: str) -> LintSettings:
    try:
        with open(path, "rb") as handle:
            raw = handle.read()
        data = tomllib.loads(raw.decode("utf-8"))
    except OSError as exc:
        raise SettingsError(f"cannot read the settings ({exc.strerror})", path) from None
    except UnicodeDecodeError:
        raise SettingsError("settings file is not UTF-8", path) from None
    except tomllib.TOMLDecodeError as exc:
        raise SettingsError(f"not valid TOML: {exc}", path) from None
    text = raw.decode("utf-8")
    if os.path.basename(path) == "pyproject.toml":
        data = data.get("tool", {}).get("tauscan", {})
    return from_mapping(data, path, text)


def from_mapping(data: dict, path: str, text: str = "") -> LintSettings:
    unknown = set(data) - KEYS
    if unknown:
        key = sorted(unknown)[0]
        raise SettingsError(f"unknown setting {key!r} (known: {', '.join(sorted(KEYS))})", path, _line_of(text, key))
    values: dict = {"origin": path}
    if "min-bandwidth" in data:
        values["min_bandwidth"] = bandwidth_value(data["min-bandwidth"], path, _line_of(text, "min-bandwidth"))
    for key, attr in (("miller-share", "miller_share"), ("miller-threshold", "miller_threshold")):
        if key in data:
            value = data[key]
            if not isinstance(value, (int, float)) or isinstance(value, bool) or not 0 <= value <= 1:
                raise SettingsError(f"{key} must be a number between 0 and 1", path, _line_of(text, key))
            values[attr] = float(value)
    if "fail-on" in data:
        values["fail_on"] = fail_on_value(data["fail-on"], path, _line_of(text, "fail-on"))
    for key in ("probe", "source"):
        if key in data:
            if not isinstance(data[key], str):
                raise SettingsError(f"{key} must be a string", path, _line_of(text, key))
            values[key] = data[key]
    if "severity" in data:
        table = data["severity"]
        from tauscan.lint.rules import RULES

        if not isinstance(table, dict):
            raise SettingsError("severity must be a table of rule = level", path, _line_of(text, "severity"))
        for rule, level in table.items():
            if rule not in RULES:
                raise SettingsError(f"unknown rule {rule!r} in severity", path, _line_of(text, rule))
            if level not in SEVERITIES:
                raise SettingsError(f"severity of {rule} must be one of {', '.join(SEVERITIES)}", path, _line_of(text, rule))
        values["severity"] = dict(table)
    if "waive" in data:
        table = data["waive"]
        # an empty reason is not an error here: the waiver-reason rule reports it, with its line
        if not isinstance(table, dict) or not all(isinstance(v, str) for v in table.values()):
            raise SettingsError("waive must be a table of capacitor-name glob = reason", path, _line_of(text, "waive"))
        values["waive"] = {k.lower(): v for k, v in table.items()}
        table_line = _line_of(text, "[tool.tauscan.waive]") or _line_of(text, "[waive]") or _line_of(text, "waive")
        values["waive_lines"] = {k.lower(): _line_of(text, k) or table_line for k in table}
    if "band" in data:
        values["band"] = band_value(data["band"], path, _line_of(text, "band"))
    if "rank" in data:
        values["rank"] = rank_value(data["rank"], path, _line_of(text, "rank"))
    if "states" in data:
        table = data["states"]
        if not isinstance(table, dict) or not all(v in ("short", "open") for v in table.values()):
            raise SettingsError('states must be a table of element-name glob = "short" or "open"', path,
                                _line_of(text, "[states]") or _line_of(text, "states"))
        values["states"] = {k.lower(): v for k, v in table.items()}
    if "include-dirs" in data:
        dirs = data["include-dirs"]
        if isinstance(dirs, str):
            dirs = [dirs]
        if not isinstance(dirs, list) or not all(isinstance(d, str) and d for d in dirs):
            raise SettingsError("include-dirs must be a list of folder names", path, _line_of(text, "include-dirs"))
        base = os.path.dirname(os.path.abspath(path))
        values["include_dirs"] = tuple(os.path.normpath(os.path.join(base, os.path.expanduser(d))) for d in dirs)
    if "x-mega" in data:
        if not isinstance(data["x-mega"], bool):
            raise SettingsError("x-mega must be true or false", path, _line_of(text, "x-mega"))
        values["x_mega"] = data["x-mega"]
    if "corners" in data:
        values["corners"] = _corners(data["corners"], path, _line_of(text, "[corners]") or _line_of(text, "corners"))
    return LintSettings(**values)


def _corners(table, path: str, line: int | None) -> tuple:
    """``[corners]`` with one sub-table per corner: ``slow = { vdd = 1.62, temp = 125, lib = "ss" }``."""
    from tauscan.corners import Corner

    if not isinstance(table, dict):
        raise SettingsError("corners must be a table of corner = { PARAM = value, temp = C }", path, line)
    out = []
    for name, body in table.items():
        if not isinstance(body, dict) or not body:
            raise SettingsError(f"corner {name!r} must be a table of PARAM = value", path, line)
        params, temp, lib = {}, None, None
        for key, raw in body.items():
            if key.lower() == "lib":
                from tauscan.corners import check_section

                lib = check_section(str(raw), f"corner {name}", path, line)
                continue
            value = _number(raw, f"corner {name}: {key}", path, line)
            if key.lower() == "temp":
                temp = value
            else:
                params[key.lower()] = value
        out.append(Corner(name.lower(), params, temp, lib))
    return tuple(out)


def _number(raw, what: str, path: str, line: int | None) -> float:
    if isinstance(raw, (int, float)) and not isinstance(raw, bool):
        return float(raw)
    if not isinstance(raw, str):
        raise SettingsError(f"{what} must be a number, not {raw!r}", path, line)
    try:
        return parse_option_value(raw)
    except OptionValueError as exc:
        raise SettingsError(f"{what}: {exc}", path, line) from None


def frequency_value(raw, what: str, path: str | None = None, line: int | None = None,
                    expected: str = "a positive frequency such as 100k, 2.5meg or 10MHz") -> float:
    """A positive frequency from an option or a setting: ``100k``, ``2.5meg``, ``10MHz``,
    ``10 kHz`` (see :func:`tauscan.units.parse_option_value`: a bare ``M`` is refused).
    A number with a refused suffix gets the reason; anything else the ``expected`` forms."""
    generic = SettingsError(f"{what} takes {expected}, not {raw!r}", path, line)
    if isinstance(raw, (int, float)) and not isinstance(raw, bool):
        value = float(raw)
    elif isinstance(raw, str):
        try:
            value = parse_option_value(raw, "Hz")
        except OptionValueError as exc:
            if not raw.strip()[:1].isdigit():
                raise generic from None
            raise SettingsError(f"{what}: {exc}", path, line) from None
    else:
        raise generic
    if not value > 0 or value == float("inf"):
        raise generic
    return value


def bandwidth_value(raw, path: str | None = None, line: int | None = None) -> float:
    return frequency_value(raw, "min-bandwidth", path, line)


def band_value(raw, path: str | None = None, line: int | None = None) -> tuple:
    """``auto``, ``dc`` or a frequency (``10k``, ``1meg``, ``10kHz``): the mid-band circuit's choice."""
    if isinstance(raw, str) and raw.strip().lower() in ("auto", "dc"):
        return (raw.strip().lower(), None)
    return ("fixed", frequency_value(raw, "band", path, line, "auto, dc or a positive frequency such as 10k or 10kHz"))


def rank_value(raw, path: str | None = None, line: int | None = None) -> str:
    if raw not in RANKS:
        raise SettingsError(f"rank must be one of {', '.join(RANKS)}; not {raw!r}", path, line)
    return raw


def fail_on_value(raw, path: str | None = None, line: int | None = None) -> str:
    if raw not in (*SEVERITIES, "never"):
        raise SettingsError(f"fail-on must be one of note, warning, error, never; not {raw!r}", path, line)
    return raw
