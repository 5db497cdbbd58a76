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

_INLINE = re.compile(r"tauscan-waive(?:\[(?P<part>[a-z0-9_]*)\])?\s*(?::\s*(?P<reason>.*))?", re.IGNORECASE)


@dataclass(frozen=True)
class Waiver:
    capacitor: str
    reason: str
    source: str  # "settings <file>" or "netlist <file>:<line>"


def inline_waiver(comment: str) -> tuple[str | None, str] | None:
    """(part or None, reason) of a ``tauscan-waive`` comment, or None; the reason is ""
    when the comment gives none (such a waiver is not applied: see :func:`audit`)."""
    match = _INLINE.search(comment or "")
    if not match:
        return None
    return (match.group("part").lower() if match.group("part") else None), (match.group("reason") or "").strip()


@dataclass(frozen=True)
class Problem:
    """A waiver that applies to nothing, or that gives no reason."""

    kind: str  # "unused" or "reason"
    file: str
    line: int | None
    subject: str
    message: str


def audit(analysis, circuit, patterns: dict[str, str], origin: str | None,
          lines: dict[str, int | None] | None = None) -> list[Problem]:
    """Every waiver that matches no capacitor of the circuit (a stale glob, a part the
    device does not have, a comment on an element without capacitors) or gives no reason.

    Capacitors that are shorts at mid-band (``analysis.band.low_band``) and those the
    analysis left out (``analysis.excluded``) count as matched: they exist.
    """
    lines = lines or {}
    names = [c.name for c in analysis.capacitors]
    band = getattr(analysis, "band", None)
    names += [e.name for e in getattr(band, "low_band", ())]
    names += list(getattr(analysis, "excluded", ()))
    parts: dict[str, set[str]] = {}
    for cap in analysis.capacitors:
        if cap.device:
            parts.setdefault(cap.device, set()).add(cap.name.rpartition(":")[2])
    present = set(names)
    out: list[Problem] = []
    where = origin or "settings"
    for pattern, reason in patterns.items():
        line = lines.get(pattern)
        if not reason.strip():
            out.append(Problem("reason", where, line, pattern,
                               f"the waiver {pattern!r} gives no reason; it is not applied"))
        if not any(fnmatch.fnmatchcase(n, pattern) for n in names):
            out.append(Problem("unused", where, line, pattern,
                               f"the waiver {pattern!r} matches no capacitor of {analysis.netlist}"))
    for e in circuit.commented():
        found = inline_waiver(e.comment)
        if found is None:
            continue
        part, reason = found
        if not reason:
            out.append(Problem("reason", e.file, e.line, e.name,
                               f"the inline waiver on {e.name} gives no reason ('tauscan-waive: why'); it is not applied"))
        own = parts.get(e.name, set())
        if part is not None:
            if part not in own:
                have = ", ".join(sorted(own)) or "none"
                out.append(Problem("unused", e.file, e.line, f"{e.name}:{part}",
                                   f"the inline waiver names {e.name}:{part}, which does not exist (its parts: {have})"))
        elif e.name not in present and not own:
            out.append(Problem("unused", e.file, e.line, e.name,
                               f"the inline waiver on {e.name} applies to no capacitor"))
    return out


def resolve(analysis, circuit, patterns: dict[str, str], origin: str | None) -> dict[str, Waiver]:
    """Capacitor name -> the waiver that applies to it."""
    comments = {e.name: e.comment for e in circuit.commented()}
    out: dict[str, Waiver] = {}
    for cap in analysis.capacitors:
        owner = cap.device or cap.name
        comment = comments.get(owner, "")
        found = inline_waiver(comment)
        if found is not None and found[1]:
            part, reason = found
            if part is None or cap.name.endswith(":" + part):
                out[cap.name] = Waiver(cap.name, reason, f"netlist {cap.file}:{cap.line}")
                continue
        for pattern, reason in patterns.items():
            if reason.strip() and fnmatch.fnmatchcase(cap.name, pattern):
                out[cap.name] = Waiver(cap.name, reason, f"settings {origin or ''}".strip())
                break
    return out
