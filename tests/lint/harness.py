"""An in-process harness for lint rules: build a small circuit in Python, run the stages
and the gate, and compare the findings (no process per case, as linters test their rules).

    circuit = build("stage", [("vin", "v", ("src", "0"), 0.0, {"ac": 1.0}), ("rs", "r", ("src", "g"), 50e3), ...])
    assert rules_of(lint(circuit)) == ["miller-node"]
"""

from __future__ import annotations

from tauscan.analysis import AnalysisSettings, analyze_network
from tauscan.circuit import Circuit, Element, Model, SourceSpec
from tauscan.lint.gate import LintResult, run_rules
from tauscan.lint.settings import LintSettings
from tauscan.linear import linearize
from tauscan.op import solve_dc

FILE = "<harness>"


def build(title: str, elements: list[tuple], models: dict[str, tuple[str, dict]] | None = None) -> Circuit:
    """A flat circuit from ``(name, kind, nodes, value[, extra])`` tuples; ``extra`` holds
    ``ac`` (a source's AC magnitude), ``model``, ``params``, ``control`` and ``comment``.
    Each element's line is its position in the list, counted from 1."""
    general = []
    for line, item in enumerate(elements, start=1):
        name, kind, nodes, value = item[:4]
        extra = item[4] if len(item) > 4 else {}
        source = None
        if kind in "vi":
            source = SourceSpec(dc=value, dc_given=True, ac_mag=extra.get("ac", 0.0))
        general.append(Element(name, kind, tuple(nodes), value, extra.get("model"), dict(extra.get("params", {})),
                               FILE, line, source, tuple(extra.get("control", ())), extra.get("comment", "")))
    cards = {name: Model(name, typ, dict(params), FILE, 0) for name, (typ, params) in (models or {}).items()}
    return Circuit(title, FILE, general=general, models=cards)


def lint(circuit: Circuit, settings: LintSettings | None = None) -> LintResult:
    """Bias, linearize, analyze and run every rule, in this process."""
    settings = settings or LintSettings()
    op = solve_dc(circuit)
    analysis = analyze_network(linearize(op), op, settings.probe, settings.source,
                               AnalysisSettings(miller_threshold=settings.miller_threshold))
    return run_rules(analysis, circuit, op, settings, settings.probe is not None)


def rules_of(result: LintResult) -> list[str]:
    return [f.rule for f in result.findings]
