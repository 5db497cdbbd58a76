"""The lint rules.  Each has an id, a default severity and a function from an analysis
(plus its circuit and settings) to findings.  To add a rule: write the function,
register it in :data:`RULES` with its text, and add a test with a netlist that
triggers it and one that does not (see DEVELOPERS.md)."""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

from tauscan.devices import registry
from tauscan.lint.findings import Finding
from tauscan.units import eng


@dataclass(frozen=True)
class Rule:
    id: str
    severity: str
    summary: str
    description: str
    check: Callable


def _first_line(circuit, node: str, default: str) -> tuple[str, int | None]:
    """(file, line) of the first element of the flat circuit that touches ``node``
    (``(default, None)`` when none does)."""
    first = circuit.first_use(node)
    return (first.file, first.line) if first is not None else (default, None)


def miller_node(ctx) -> list[Finding]:
    """A node whose time constant is mostly Miller multiplication.  With a transfer, it is
    judged on the signal path: its transfer share and the signal's own Miller part (a node
    the drive or the probe does not reach is never the subject)."""
    a, s = ctx.analysis, ctx.settings
    if a.rank == "transfer" and a.sum_transfer_tau_s is not None:
        return _signal_miller_nodes(ctx)
    # a waived capacitor's Miller part does not count toward a node finding
    waived_excess: dict[str, float] = {}
    for cap in a.capacitors:
        if cap.name in ctx.waivers and cap.miller_excess_s:
            waived_excess[cap.node_in] = waived_excess.get(cap.node_in, 0.0) + cap.miller_excess_s
    found = []
    for node in a.nodes:
        miller = node.miller_tau_s - waived_excess.get(node.node, 0.0)
        if node.tau_s <= 0 or node.share < s.miller_share:
            continue
        if miller < s.miller_threshold * node.tau_s:
            continue
        caps = [c for c in a.capacitors if c.node_in == node.node and c.klass == "miller" and c.name not in ctx.waivers]
        caps.sort(key=lambda c: -c.miller_excess_s)
        worst = caps[0] if caps else None
        found.append(_miller_finding(
            ctx, node.node, worst,
            "node {} carries {:.0%} of the total time constant, {:.0%} of it Miller multiplication{}",
            (node.node, node.share, miller / node.tau_s,
             f" (mostly {worst.name}, gain {worst.gain:.3g}, factor {worst.factor_in:.3g})" if worst else ""),
            {"share": node.share, "miller_share": miller / node.tau_s, "tau_s": node.tau_s},
        ))
    return found


def _miller_finding(ctx, node: str, worst, template: str, args: tuple, numbers: dict) -> Finding:
    """A miller-node finding, placed on the line of its worst capacitor (or of the node's first use)."""
    if worst is not None:
        file, line = worst.file, worst.line
    else:
        file, line = _first_line(ctx.circuit, node, ctx.analysis.netlist)
    return Finding("miller-node", ctx.level("miller-node"), file, line, node, template, args, numbers)


def _signal_miller_nodes(ctx) -> list[Finding]:
    a, s = ctx.analysis, ctx.settings
    found = []
    for node in a.nodes:
        if not node.on_signal_path or not node.transfer_tau_s or node.transfer_tau_s <= 0:
            continue
        if (node.transfer_share or 0.0) < s.miller_share:
            continue
        caps = [c for c in a.capacitors if c.on_signal_path and c.name not in ctx.waivers and c.signal_gain is not None
                and c.signal_gain < 0 and node.node in (c.node_in, c.node_out)]
        # the signal Miller part left once waived capacitors are taken out, in proportion to
        # their share of the node's signal-Miller capacitors' transfer time constants
        all_caps = [c for c in a.capacitors if c.on_signal_path and c.signal_gain is not None and c.signal_gain < 0
                    and node.node in (c.node_in, c.node_out)]
        total = sum(abs(c.transfer_tau_s or 0.0) for c in all_caps)
        kept = sum(abs(c.transfer_tau_s or 0.0) for c in caps)
        miller = (node.signal_miller_share or 0.0) * (kept / total if total else 0.0)
        if miller < s.miller_threshold:
            continue
        caps.sort(key=lambda c: -(c.transfer_tau_s or 0.0))
        worst = caps[0] if caps else None
        found.append(_miller_finding(
            ctx, node.node, worst,
            "node {} carries {:.0%} of the signal path's time constant, {:.0%} of it Miller multiplication{}",
            (node.node, node.transfer_share, miller,
             f" (mostly {worst.name}, signal gain {worst.signal_gain:.3g})" if worst else ""),
            {"share": node.transfer_share, "miller_share": miller, "tau_s": node.transfer_tau_s},
        ))
    return found


def judged_bandwidth(a) -> tuple[float | None, str]:
    """The figure the bandwidth floor judges: the exact -3 dB frequency ("f3db"), else the
    signal-path estimate ("elmore"), else the open-circuit one ("octc")."""
    if a.f3db_hz is not None:
        return a.f3db_hz, "f3db"
    if a.elmore_hz is not None:
        return a.elmore_hz, "elmore"
    return a.octc_hz, "octc"


def bandwidth_floor(ctx) -> list[Finding]:
    """The exact -3 dB frequency of the transfer against the floor (the signal-path
    estimate, then the open-circuit one, only where there is no exact figure)."""
    a, s = ctx.analysis, ctx.settings
    if s.min_bandwidth is None:
        return []
    figure, kind = judged_bandwidth(a)
    what = {"f3db": f"-3 dB bandwidth at {a.probe}", "elmore": "signal-path (transfer time-constant) estimate",
            "octc": "open-circuit time-constant estimate"}[kind]
    if figure is None or figure >= s.min_bandwidth:
        return []
    top = next((c for c in a.capacitors if c.on_signal_path), None)
    return [Finding(
        "bandwidth-floor", ctx.level("bandwidth-floor"), top.file if top else a.netlist, top.line if top else None,
        a.probe or "circuit",
        "{} is {}, below the floor of {}{}",
        (what, eng(figure, "Hz"), eng(s.min_bandwidth, "Hz"),
         (f"; the largest transfer time constant is {top.name} ({top.transfer_share:.0%})"
          if top and top.transfer_share is not None else
          f"; the largest time constant is {top.name} ({top.share:.0%})" if top else "")),
        {"hz": figure, "floor_hz": s.min_bandwidth},
    )]


def regenerative_cap(ctx) -> list[Finding]:
    out = []
    for cap in ctx.analysis.capacitors:
        # a negative part of a charge-based device's matrix across K >= 1 presents C (1 - K) > 0
        # at its input: no negative capacitance, nothing regenerative to warn about
        if cap.klass == "regenerative" and cap.farads > 0 and cap.name not in ctx.waivers:
            out.append(Finding(
                "regenerative-cap", ctx.level("regenerative-cap"), cap.file, cap.line, cap.name,
                "{} spans a gain of {:.3g} from {} to {}: its input sees a negative capacitance (positive feedback)",
                (cap.name, cap.gain, cap.node_in, cap.node_out), {"gain": cap.gain},
            ))
    return out


def unstable_pole(ctx) -> list[Finding]:
    a = ctx.analysis
    if not a.unstable_poles:
        return []
    p = max(a.unstable_poles, key=lambda q: q.real)
    return [Finding(
        "unstable-pole", ctx.level("unstable-pole"), a.netlist, None, a.probe or "circuit",
        "{} pole{} in the right half-plane (the fastest-growing at {}, real part {:+.3g} /s): the circuit "
        "oscillates or latches, and its bandwidth figures do not apply",
        (len(a.unstable_poles), "s" if len(a.unstable_poles) > 1 else "", eng(abs(p) / (2 * 3.141592653589793), "Hz"),
         p.real), {"count": len(a.unstable_poles), "real": p.real, "imag": p.imag},
    )]


def floating_node(ctx) -> list[Finding]:
    out = []
    for node in ctx.analysis.floating:
        file, line = _first_line(ctx.circuit, node, ctx.analysis.netlist)
        out.append(Finding(
            "floating-node", ctx.level("floating-node"), file, line, node,
            "node {} has no DC path to ground; only GMIN holds its bias", (node,), {},
        ))
    return out


def bias_region(ctx) -> list[Finding]:
    out = []
    for dev in ctx.op.devices:
        bad = dev.region in registry.by_name(dev.family).poor_regions
        if not bad or not ctx.carries_signal(dev):
            continue
        out.append(Finding(
            "bias-region", ctx.level("bias-region"), dev.file, dev.line, dev.name,
            "{} ({}) is in {} but carries signal: its gain and capacitances are far from an amplifier's",
            (dev.name, dev.type, dev.region), {"region": dev.region},
        ))
    return out


def _waiver_problems(ctx, kind: str) -> list[Finding]:
    problems = ctx.waiver_problems
    rule = "waiver-unused" if kind == "unused" else "waiver-reason"
    return [Finding(rule, ctx.level(rule), p.file, p.line, p.subject, "{}", (p.message,))
            for p in problems if p.kind == kind]


def waiver_unused(ctx) -> list[Finding]:
    """A waiver (settings glob or inline comment) that matches no capacitor."""
    return _waiver_problems(ctx, "unused")


def waiver_reason(ctx) -> list[Finding]:
    """A waiver without a reason (it is not applied)."""
    return _waiver_problems(ctx, "reason")


RULES: dict[str, Rule] = {
    r.id: r
    for r in (
        Rule("miller-node", "warning", "Miller-dominated node",
             "A node whose time constant is mostly Miller multiplication and that carries a large share of the total.",
             miller_node),
        Rule("bandwidth-floor", "error", "Bandwidth below the floor",
             "The exact -3 dB frequency of the source-to-probe transfer (an estimate only where there is none) "
             "is below --min-bandwidth.",
             bandwidth_floor),
        Rule("unstable-pole", "error", "Pole in the right half-plane",
             "The small-signal network has a pole with a positive real part: it oscillates or latches.",
             unstable_pole),
        Rule("regenerative-cap", "warning", "Capacitor across a gain of one or more",
             "A capacitor spanning a non-inverting gain of 1 or more: its input sees a negative capacitance.",
             regenerative_cap),
        Rule("floating-node", "warning", "Node without a DC path",
             "A node with no DC path to ground; only GMIN holds it, so its bias is not defined by the circuit.",
             floating_node),
        Rule("bias-region", "warning", "Signal transistor outside its amplifying region",
             "A transistor in triode or cutoff (or a saturated or cut-off bipolar) on the signal path.",
             bias_region),
        Rule("waiver-unused", "warning", "Waiver that matches nothing",
             "A settings glob or an inline waiver that applies to no capacitor of the netlist (stale, or misspelt).",
             waiver_unused),
        Rule("waiver-reason", "warning", "Waiver without a reason",
             "A waiver that says no reason; it is not applied until it does.",
             waiver_reason),
    )
}
