"""Run the rules over one analysis and turn findings into an exit code."""

from __future__ import annotations

from dataclasses import dataclass, field

from tauscan.analysis.result import Analysis
from tauscan.circuit import Circuit
from tauscan.lint import waivers as waiver_mod
from tauscan.lint.findings import Finding, severity_rank
from tauscan.lint.rules import RULES, judged_bandwidth
from tauscan.lint.settings import LintSettings
from tauscan.op.result import OperatingPoint


@dataclass(frozen=True)
class LintContext:
    """What a rule reads: the analysis, the circuit and operating point it came from, the
    settings and the waivers in force."""

    analysis: Analysis
    circuit: Circuit
    op: OperatingPoint
    settings: LintSettings
    waivers: dict[str, waiver_mod.Waiver]
    probe_given: bool
    signal_nodes: frozenset[str] | None = None
    #: waivers that match nothing or give no reason (found once, read by two rules)
    waiver_problems: tuple = ()

    def level(self, rule: str) -> str:
        return self.settings.severity.get(rule, RULES[rule].severity)

    def carries_signal(self, dev) -> bool:
        if self.signal_nodes is None:
            return True  # no AC source: every device may carry signal
        return any(node in self.signal_nodes for key, node in dev.nodes.items() if key in ("g", "b", "d", "c", "e", "s"))


@dataclass
class LintResult:
    findings: list[Finding]
    waivers: list[waiver_mod.Waiver] = field(default_factory=list)
    #: the bandwidth floor applied, the figure judged and the margin to it (None: no floor set)
    floor: dict | None = None

    @property
    def waived(self) -> dict[str, str]:
        """Capacitor name -> the reason of the waiver that applies to it."""
        return {w.capacitor: w.reason for w in self.waivers}


def run_rules(analysis: Analysis, circuit: Circuit, op: OperatingPoint, settings: LintSettings,
              probe_given: bool) -> LintResult:
    """Every rule over one analysis; the analysis is only read."""
    used = waiver_mod.resolve(analysis, circuit, settings.waive, settings.origin)
    problems = tuple(waiver_mod.audit(analysis, circuit, settings.waive, settings.origin, settings.waive_lines))
    ctx = LintContext(analysis, circuit, op, settings, used, probe_given, analysis.signal_nodes, problems)
    findings: list[Finding] = []
    for rule in RULES.values():
        findings.extend(rule.check(ctx))
    findings.sort(key=lambda f: (-severity_rank(f.severity), f.rule, f.file, f.line or 0, f.subject))
    return LintResult(findings, sorted(used.values(), key=lambda w: w.capacitor), _floor(analysis, settings))


def _floor(a: Analysis, settings: LintSettings) -> dict | None:
    """The floor, the figure the bandwidth-floor rule judges and the margin (figure / floor - 1)."""
    if settings.min_bandwidth is None:
        return None
    figure, judged = judged_bandwidth(a)
    margin = figure / settings.min_bandwidth - 1.0 if figure is not None else None
    return {"floor_hz": settings.min_bandwidth, "judged_hz": figure, "judged": judged, "margin": margin}


def exit_code(findings: list[Finding], fail_on: str) -> int:
    """0 when no finding is at or above ``fail_on``, 1 otherwise (errors are exit 2 elsewhere)."""
    if fail_on == "never":
        return 0
    threshold = severity_rank(fail_on)
    return 1 if any(severity_rank(f.severity) >= threshold for f in findings) else 0
