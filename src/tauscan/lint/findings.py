"""A finding: one rule's verdict on one place, with the numbers behind it.

The message template and its arguments are kept apart, so that every output
format renders the same finding without parsing text.
"""

from __future__ import annotations

from dataclasses import dataclass, field

SEVERITIES = ("note", "warning", "error")


def severity_rank(level: str) -> int:
    return SEVERITIES.index(level)


@dataclass(frozen=True)
class Finding:
    rule: str
    severity: str
    file: str
    line: int | None
    subject: str  # the capacitor, node or device it is about
    template: str
    args: tuple = ()
    numbers: dict = field(default_factory=dict, compare=False, hash=False)
    netlist: str = ""

    @property
    def message(self) -> str:
        return self.template.format(*self.args)

    def to_json(self) -> dict:
        out = {
            "rule": self.rule,
            "severity": self.severity,
            "message": self.message,
            "file": self.file,
            "line": self.line,
            "subject": self.subject,
        }
        out.update({k: v for k, v in self.numbers.items()})
        return out
