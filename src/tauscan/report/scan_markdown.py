"""The scan report as Markdown tables, for a design review or a merge request."""

from __future__ import annotations

from tauscan.units import eng


def _pct(x):
    return "-" if x is None else f"{100 * x:.1f}%"


def _num(x):
    return "-" if x is None else f"{x:.3g}"


def _row(cells) -> str:
    return "| " + " | ".join(str(c).replace("|", "\\|") for c in cells) + " |"


def render(runs: list, top: int | None = 20) -> str:
    out = []
    for run in runs:
        a = run.analysis
        out.append(f"## {a.title or run.request.netlist}")
        out.append("")
        out.append(f"Netlist `{run.request.netlist}`" + (f", source `{a.source}`" if a.source else "") + (f", probe `{a.probe}`" if a.probe else ""))
        out.append("")
        out.append(_row(["figure", "value"]))
        out.append(_row(["---", "---"]))
        out.append(_row(["sum of time constants", eng(a.sum_tau_s, "s")]))
        out.append(_row(["open-circuit estimate", eng(a.octc_hz, "Hz")]))
        out.append(_row(["dominant pole", eng(a.dominant_pole_hz, "Hz")]))
        out.append(_row(["-3 dB", eng(a.f3db_hz, "Hz")]))
        out.append(_row(["estimate vs exact", "-" if a.estimate_error is None else f"{100 * a.estimate_error:+.1f}%"]))
        out.append("")
        caps = a.capacitors[:top] if top else a.capacitors
        out.append(f"### Capacitors ({len(caps)} of {len(a.capacitors)})")
        out.append("")
        out.append(_row(["#", "capacitor", "input -> other", "C", "gain", "class", "Miller x", "R seen", "tau", "share", "pole share", "f without it", "f cascoded"]))
        out.append(_row(["---:", "---", "---", "---:", "---:", "---", "---:", "---:", "---:", "---:", "---:", "---:", "---:"]))
        waived = run.lint.waived
        for k, c in enumerate(caps, start=1):
            out.append(_row([k, f"`{c.name}`" + (" (waived)" if c.name in waived else ""), f"{c.node_in} -> {c.node_out}", eng(c.farads, "F"), _num(c.gain), c.klass,
                             _num(c.factor_in), eng(c.ohms, "ohm"), eng(c.tau_s, "s"), _pct(c.share), _pct(c.pole_share),
                             eng(c.octc_hz_if_removed, "Hz"), eng(c.octc_hz_if_cascoded, "Hz")]))
        out.append("")
        nodes = a.nodes[:top] if top else a.nodes
        out.append(f"### Nodes ({len(nodes)} of {len(a.nodes)})")
        out.append("")
        out.append(_row(["node", "tau", "share", "Miller share", "Miller-dominated"]))
        out.append(_row(["---", "---:", "---:", "---:", "---"]))
        for n in nodes:
            out.append(_row([f"`{n.node}`", eng(n.tau_s, "s"), _pct(n.share), _pct(n.miller_share), "yes" if n.miller_dominated else ""]))
        out.append("")
        if run.lint.findings:
            out.append("### Findings")
            out.append("")
            out.append(_row(["severity", "rule", "where", "message"]))
            out.append(_row(["---", "---", "---", "---"]))
            for f in run.lint.findings:
                out.append(_row([f.severity, f.rule, f"{f.file}:{f.line or ''}", f.message]))
            out.append("")
        if run.lint.waivers:
            out.append("### Waivers in use")
            out.append("")
            for w in run.lint.waivers:
                out.append(f"- `{w.capacitor}`: {w.reason} ({w.source})")
            out.append("")
        for w in a.warnings:
            out.append(f"> warning: {w}")
        out.append("")
        out.append("_First-order estimates from device models: they point where to look and never replace simulation and sign-off._")
        out.append("")
    return "\n".join(out)
