"""Named small-signal values of a device -> linear primitives.

Kept apart from the models so that values given by the user (``--op``) are
placed exactly as computed ones are.
"""

from __future__ import annotations

from tauscan.devices.base import DeviceOP, SmallSignal

#: where each capacitance part sits: part -> (terminal, terminal)
CAP_TERMINALS = {
    "mos": {"cgs": ("g", "s_phys"), "cgd": ("g", "d_phys"), "cgb": ("g", "b"), "cbd": ("b", "d_phys"), "cbs": ("b", "s_phys")},
    "bjt": {"cbe": ("b", "e"), "cbc": ("b", "c"), "cbx": ("bx", "c"), "ccs": ("c", "sub")},
    "diode": {"cj": ("a", "k")},
}


def family(device_type: str) -> str:
    if device_type in ("nmos", "pmos"):
        return "mos"
    if device_type in ("npn", "pnp"):
        return "bjt"
    return "diode"


def build(dev: DeviceOP) -> SmallSignal:
    out = SmallSignal()
    n = dev.nodes
    v = dev.values
    fam = family(dev.type)
    if fam == "mos":
        d, g, s, b = n["d"], n["g"], n["s"], n["b"]
        out.vccs.append(("gm", d, s, g, s, v.get("gm", 0.0)))
        out.vccs.append(("gmb", d, s, b, s, v.get("gmb", 0.0)))
        out.conductances.append(("gds", d, s, v.get("gds", 0.0)))
        out.conductances.append(("gbd", b, n["d_phys"], v.get("gbd", 0.0)))
        out.conductances.append(("gbs", b, n["s_phys"], v.get("gbs", 0.0)))
    elif fam == "bjt":
        c, b, e = n["c"], n["b"], n["e"]
        out.conductances.append(("gpi", b, e, v.get("gpi", 0.0)))
        out.conductances.append(("gmu", b, c, v.get("gmu", 0.0)))
        out.conductances.append(("go", c, e, v.get("go", 0.0)))
        out.vccs.append(("gm", c, e, b, e, v.get("gm", 0.0)))
    else:
        out.conductances.append(("gd", n["a"], n["k"], v.get("gd", 0.0)))
    for part, (ta, tb) in CAP_TERMINALS[fam].items():
        value = dev.caps.get(part)
        if value and ta in n and tb in n:
            out.capacitors.append((part, n[ta], n[tb], value))
    for part, (a, b, g) in _series(dev).items():
        out.conductances.append((part, a, b, g))
    return out


def _series(dev: DeviceOP) -> dict[str, tuple[str, str, float]]:
    """Series resistances between external and internal terminals, as conductances."""
    out = {}
    for part, ohms in dev.series.items():
        ext, internal = dev.nodes[part + "_ext"], dev.nodes[part + "_int"]
        if ohms > 0 and ext != internal:
            out[part] = (ext, internal, 1.0 / ohms)
    return out
