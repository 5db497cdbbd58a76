"""A user-supplied operating point (``--op FILE``): node voltages and/or device values
taken from another simulator, overriding tauscan's own models.

JSON::

    {"nodes": {"out": 0.91, "x1.mid": 1.2},
     "devices": {"m1": {"gm": 1.2e-3, "gds": 15u, "cgd": "2f"}}}

CSV (a header, then one value a row; ``v`` is a node voltage)::

    name,quantity,value
    out,v,0.91
    m1,gm,1.2m

Values are numbers or SPICE numbers with suffixes.  Names are case-insensitive
and hierarchical as in ``tauscan expand``.  Unknown nodes, devices or
quantities are errors.
"""

from __future__ import annotations

import csv
import io
import json
import os
from dataclasses import dataclass, field

from tauscan.devices import registry
from tauscan.errors import SettingsError
from tauscan.units import parse_number

@dataclass
class GivenValue:
    value: float
    line: int


@dataclass
class GivenOP:
    path: str
    nodes: dict[str, GivenValue] = field(default_factory=dict)
    devices: dict[str, dict[str, GivenValue]] = field(default_factory=dict)


def _number(raw, path: str, line: int, what: str) -> float:
    if isinstance(raw, bool):
        raw = None
    if isinstance(raw, (int, float)):
        value = float(raw)
    elif isinstance(raw, str):
        value = parse_number(raw.strip())
    else:
        value = None
    if value is None or value != value or value in (float("inf"), float("-inf")):
        raise SettingsError(f"{what}: {raw!r} is not a number", path, line)
    return value


def read_op_file(path: str) -> GivenOP:
    try:
        with open(path, encoding="utf-8-sig") as handle:
            text = handle.read()
    except FileNotFoundError:
        raise SettingsError("operating-point file not found", path) from None
    except (OSError, UnicodeDecodeError) as exc:
        raise SettingsError(f"cannot read the operating-point file ({exc})", path) from None
    given = GivenOP(path)
    if os.path.splitext(path)[1].lower() == ".json" or text.lstrip().startswith("{"):
        _read_json(text, given)
    else:
        _read_csv(text, given)
    return given


def _line_of(text: str, needle: str) -> int:
    pos = text.find(f'"{needle}"')
    return text.count("\n", 0, pos) + 1 if pos >= 0 else 1


def _read_json(text: str, given: GivenOP) -> None:
    path = given.path
    try:
        data = json.loads(text)
    except json.JSONDecodeError as exc:
        raise SettingsError(f"not valid JSON: {exc.msg}", path, exc.lineno, exc.colno) from None
    if not isinstance(data, dict) or not set(data) <= {"nodes", "devices"}:
        raise SettingsError("expected an object with 'nodes' and/or 'devices'", path, 1)
    nodes = data.get("nodes", {})
    devices = data.get("devices", {})
    if not isinstance(nodes, dict) or not isinstance(devices, dict):
        raise SettingsError("'nodes' and 'devices' must be objects", path, 1)
    for name, raw in nodes.items():
        line = _line_of(text, name)
        given.nodes[name.lower()] = GivenValue(_number(raw, path, line, f"node {name}"), line)
    for name, values in devices.items():
        line = _line_of(text, name)
        if not isinstance(values, dict):
            raise SettingsError(f"device {name}: expected an object of quantities", path, line)
        record = given.devices.setdefault(name.lower(), {})
        for quantity, raw in values.items():
            record[quantity.lower()] = GivenValue(_number(raw, path, line, f"{name} {quantity}"), line)


def _read_csv(text: str, given: GivenOP) -> None:
    path = given.path
    rows = list(csv.reader(io.StringIO(text)))
    if not rows or [c.strip().lower() for c in rows[0]] != ["name", "quantity", "value"]:
        raise SettingsError("a CSV operating point starts with the header 'name,quantity,value'", path, 1, 1)
    for number, row in enumerate(rows[1:], start=2):
        if not row or all(not c.strip() for c in row):
            continue
        if len(row) != 3:
            raise SettingsError(f"expected 3 columns, found {len(row)}", path, number, 1, ",".join(row))
        name, quantity, raw = (c.strip() for c in row)
        value = _number(raw, path, number, f"{name} {quantity}")
        if quantity.lower() == "v":
            given.nodes[name.lower()] = GivenValue(value, number)
        else:
            given.devices.setdefault(name.lower(), {})[quantity.lower()] = GivenValue(value, number)


def check_nodes(given: GivenOP, known: set[str]) -> dict[str, float]:
    """The given node voltages, every name checked against the circuit."""
    out = {}
    for name, item in given.nodes.items():
        if name not in known:
            raise SettingsError(f"node {name!r} is not in the circuit", given.path, item.line)
        out[name] = item.value
    return out


def apply_device_values(given: GivenOP, devices: list) -> None:
    """Override device values and capacitances by name (unknown names are errors)."""
    by_name = {d.name: d for d in devices}
    for name, values in given.devices.items():
        device = by_name.get(name)
        if device is None:
            line = next(iter(values.values())).line if values else 1
            raise SettingsError(f"device {name!r} is not a transistor or diode of the circuit", given.path, line)
        model = registry.by_name(device.family)
        allowed = model.quantities
        for quantity, item in values.items():
            if quantity not in allowed:
                raise SettingsError(
                    f"{name}: unknown quantity {quantity!r} for a {device.type} (allowed: {', '.join(sorted(allowed))})",
                    given.path,
                    item.line,
                )
            if quantity in model.capacitances:
                device.caps[quantity] = item.value
            elif quantity in ("id", "ic"):
                device.current = item.value
            else:
                device.values[quantity] = item.value
            device.overridden.add(quantity)
