"""Helpers every model's stamps share: named small-signal values of a device -> linear
primitives.  Each model says how its values are placed (its ``stamps`` function, in its own
module); values given by the user (``--op``) are placed exactly as computed ones are."""

from __future__ import annotations

from tauscan.devices.base import DeviceOP, SmallSignal


def capacitors(dev: DeviceOP, out: SmallSignal, terminals: dict[str, tuple[str, str]]) -> None:
    """Add the device's capacitances by part, each between the nodes of its two terminals
    (``terminals``: part -> (terminal, terminal))."""
    n = dev.nodes
    for part, (ta, tb) in terminals.items():
        value = dev.caps.get(part)
        if value and ta in n and tb in n:
            out.capacitors.append((part, n[ta], n[tb], value))


def series(dev: DeviceOP, out: SmallSignal) -> None:
    """Series resistances between external and internal terminals, as conductances."""
    for part, ohms in dev.series.items():
        ext, internal = dev.nodes[part + "_ext"], dev.nodes[part + "_int"]
        if ohms > 0 and ext != internal:
            out.conductances.append((part, ext, internal, 1.0 / ohms))
