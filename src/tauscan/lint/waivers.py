"""Waivers: a capacitor may be accepted as it is, from the settings or from the netlist.

* Settings: ``[waive]`` maps a capacitor-name glob to a reason
  (``"x1.ccomp" = "compensation capacitor, Miller by design"``).
* Netlist: an inline comment on the element's line,
  ``C1 a b 1p ; tauscan-waive: compensation, Miller by design``.  On a device
  line it waives all of the device's capacitors; ``tauscan-waive[cgd]: ...``
  waives one part.
"""

from __future__ import annotations

import fnmatch
import re
from dataclasses import dataclass

_INLINE = re.compile(r"tauscan-waive(?:\[(?P<part>[a-z0-9_]+)\])?\s*:\s*(?P<reason>.+)", re.IGNORECASE)


@dataclass(frozen=True)
class Waiver:
    capacitor: str
    reason: str
    source: str  # "settings <file>" or "netlist <file>:<line>"


def inline_waiver(comment: str) -> tuple[str | None, str] | None:
    """(part or None, reason) of a ``tauscan-waive`` comment, or None."""
    match = _INLINE.search(comment or "")
    if not match:
        return None
    return (match.group("part").lower() if match.group("part") else None), match.group("reason").strip()


def resolve(analysis, circuit, patterns: dict[str, str], origin: str | None) -> dict[str, Waiver]:
    """Capacitor name -> the waiver that applies to it."""
    comments = {e.name: e.comment for e in circuit.general if e.comment}  # plain table rows have none
    out: dict[str, Waiver] = {}
    for cap in analysis.capacitors:
        owner = cap.device or cap.name
        comment = comments.get(owner, "")
        found = inline_waiver(comment)
        if found is not None:
            part, reason = found
            if part is None or cap.name.endswith(":" + part):
                out[cap.name] = Waiver(cap.name, reason, f"netlist {cap.file}:{cap.line}")
                continue
        for pattern, reason in patterns.items():
            if fnmatch.fnmatchcase(cap.name, pattern):
                out[cap.name] = Waiver(cap.name, reason, f"settings {origin or ''}".strip())
                break
    return out
