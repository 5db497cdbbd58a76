"""The device-model registry: which model evaluates an element, keyed by its element letter,
its model card's type and the card's level.

A model is a :class:`DeviceModel`: a description (letter, model types, levels, terminals,
the named small-signal quantities and capacitances a ``--op`` file may give, its regions)
plus a group class that evaluates every device of the circuit that uses it, vectorized, and
a function that turns one device's named values into linear primitives.  Adding a model
means one module with its :class:`DeviceModel` and a call to :func:`register`; no other
file changes.
"""

from __future__ import annotations

import importlib
from collections.abc import Callable
from dataclasses import dataclass

from tauscan.circuit import Circuit, Element
from tauscan.errors import CircuitError


@dataclass(frozen=True)
class DeviceModel:
    """One device model as the later stages see it.

    Parameters
    ----------
    name : str
        Its family name in reports and errors (``"mos"``, ``"bjt"``, ``"diode"``).
    letter : str
        The element letter it evaluates (``"m"``, ``"q"``, ``"d"``).
    model_types : frozenset of str
        ``.model`` card types it accepts (``nmos``, ``pmos``, ...).
    levels : frozenset of int or None
        Card levels it evaluates; None for any level (a fallback, used when no model
        registered for the exact level exists).
    terminals : tuple of str
        Its terminal names in netlist order.
    quantities : frozenset of str
        Named small-signal values and capacitances a user-supplied operating point may set.
    capacitances : frozenset of str
        Those of ``quantities`` that are capacitances (device parts, ``m1:cgd``).
    regions : tuple of str
        Region names its report uses.
    poor_regions : frozenset of str
        Regions in which a device on the signal path is a finding (``bias-region``).
    json_values, json_bias, json_caps : tuple of str
        The named values, bias voltages and capacitances ``tauscan op --format json``
        writes for each device, in order (capacitances not listed are written when present).
    table_bias : tuple of str
        Bias voltages shown in the terminal table of the operating point.
    output_conductance : str
        The named value shown as the output conductance.
    table_ratios : tuple of (label, numerator, denominator)
        Ratios of named values or bias entries shown in the table beside gm/id (a bipolar's
        ``ic/ib``); ``"current"`` names the device current.
    group : callable
        ``group(elements, circuit, network, temp_c, warnings)``: the vectorized evaluator of
        every device of this model in a circuit (see ``devices/diode.py``, the smallest).
    stamps : callable
        ``stamps(device_op) -> SmallSignal``: one device's named values as linear
        primitives, so that values from a file are placed as computed ones are.
    """

    name: str
    letter: str
    model_types: frozenset[str]
    levels: frozenset[int] | None
    terminals: tuple[str, ...]
    quantities: frozenset[str]
    capacitances: frozenset[str]
    regions: tuple[str, ...]
    poor_regions: frozenset[str]
    json_values: tuple[str, ...]
    json_bias: tuple[str, ...]
    json_caps: tuple[str, ...]
    table_bias: tuple[str, ...]
    output_conductance: str
    group: Callable
    stamps: Callable
    table_ratios: tuple[tuple[str, str, str], ...] = ()


_MODELS: dict[tuple[str, str, int | None], DeviceModel] = {}
_BY_NAME: dict[str, DeviceModel] = {}


def register(model: DeviceModel) -> DeviceModel:
    """Add a model (a later registration for the same key replaces the earlier one)."""
    for model_type in model.model_types:
        for level in model.levels or (None,):
            _MODELS[(model.letter, model_type, level)] = model
    _BY_NAME[model.name] = model
    return model


def unregister(model: DeviceModel) -> None:
    """Take a model out again (tests that register their own)."""
    for key in [k for k, v in _MODELS.items() if v is model]:
        del _MODELS[key]
    if _BY_NAME.get(model.name) is model:
        del _BY_NAME[model.name]


def letters() -> frozenset[str]:
    """Element letters some registered model evaluates."""
    _load_builtin()
    return frozenset(letter for letter, _, _ in _MODELS)


def model_for(element: Element, circuit: Circuit) -> DeviceModel:
    """The model that evaluates ``element``: the one registered for its card's exact level,
    else the one registered for any level of that type."""
    _load_builtin()
    card = circuit.models.get(element.model or "")
    if card is None:
        raise CircuitError(f"{element.name}: model {element.model!r} is not defined", element.file, element.line)
    level = card.params.get("level")
    level = int(level) if isinstance(level, float) and level == int(level) else None
    found = _MODELS.get((element.kind, card.type, level)) or _MODELS.get((element.kind, card.type, None))
    if found is None:
        wanted = sorted({t for (letter, t, _) in _MODELS if letter == element.kind})
        raise CircuitError(f"{element.name}: model {card.name!r} is a {card.type!r} model, not "
                           + " or ".join(wanted or ["one this element takes"]), element.file, element.line)
    return found


def by_name(name: str) -> DeviceModel:
    """The registered model of a family name (a device's ``family``)."""
    _load_builtin()
    return _BY_NAME[name]


#: The modules of the built-in models; each registers its model when imported.
BUILTIN = ("tauscan.devices.mosfet", "tauscan.devices.bsim4", "tauscan.devices.bipolar", "tauscan.devices.diode")
_loaded = False


def _load_builtin() -> None:
    """Import the built-in models on first use."""
    global _loaded
    if not _loaded:
        _loaded = True
        for module in BUILTIN:
            importlib.import_module(module)
