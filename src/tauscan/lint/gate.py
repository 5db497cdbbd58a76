"""Run the rules over one analysis and turn findings into an exit code."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from tauscan.lint import waivers as waiver_mod
from tauscan.lint.findings import Finding, severity_rank
from tauscan.lint.rules import RULES
from tauscan.lint.settings import LintSettings


@dataclass
class LintContext:
    analysis: object
    circuit: object
    op: object
    settings: LintSettings
    waivers: dict
    probe_given: bool
    signal_nodes: set | None = None

    def level(self, rule: str) -> str:
        return self.settings.severity.get(rule, RULES[rule].severity)

    def carries_signal(self, dev) -> bool:
        if self.signal_nodes is None:
            return True  # no AC source: every device may carry signal
        return any(node in self.signal_nodes for key, node in dev.nodes.items() if key in ("g", "b", "d", "c", "e", "s"))


@dataclass
class LintResult:
    findings: list[Finding]
    waivers: list = field(default_factory=list)


def signal_nodes(analysis, ss, op) -> set | None:
    """Nodes that respond to the AC source at a frequency below the estimate (a tenth of it)."""
    if analysis.source is None:
        return None
    from tauscan.analysis.poles import complex_solver

    src = ss.circuit.element(analysis.source)
    b = ss.network.ac_vector(src)[1:]
    f = (analysis.octc_hz or 1.0) / 10
    name, solved = getattr(ss, "solved_responses", (None, {}))
    x = solved.get(f) if name == src.name else None  # the probe choice solved there already
    if x is None:
        solver = complex_solver(ss.g, ss.c, ss)
        try:
            x = solver.solve(solver.factor(2j * np.pi * f), b.astype(complex))
        except RuntimeError:  # singular at this frequency: treat every device as on the signal path
            return None
    mags = np.abs(x[: ss.n_nodes])
    top = mags.max(initial=0.0)
    if top == 0:
        return set()
    names = ss.network.nodes
    return {names[i + 1] for i in np.flatnonzero(mags > 1e-3 * top)}


def run_rules(analysis, circuit, op, settings: LintSettings, probe_given: bool, signal: set | None) -> LintResult:
    used = waiver_mod.resolve(analysis, circuit, settings.waive, settings.origin)
    for cap in analysis.capacitors:
        if cap.name in used:
            cap.waived = used[cap.name].reason
    ctx = LintContext(analysis, circuit, op, settings, used, probe_given, signal)
    findings: list[Finding] = []
    for rule in RULES.values():
        findings.extend(rule.check(ctx))
    findings.sort(key=lambda f: (-severity_rank(f.severity), f.rule, f.file, f.line or 0, f.subject))
    return LintResult(findings, sorted(used.values(), key=lambda w: w.capacitor))


def exit_code(findings: list[Finding], fail_on: str) -> int:
    """0 when no finding is at or above ``fail_on``, 1 otherwise (errors are exit 2 elsewhere)."""
    if fail_on == "never":
        return 0
    threshold = severity_rank(fail_on)
    return 1 if any(severity_rank(f.severity) >= threshold for f in findings) else 0
