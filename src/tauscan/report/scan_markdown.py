"""The scan report as Markdown tables, for a design review or a merge request."""

from __future__ import annotations

from tauscan.report.scan_table import fix_first_line, signed_pct
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
        out.append(f"## {a.title or run.request.netlist}" + (f" (corner {run.request.corner})" if run.request.corner else ""))
        out.append("")
        out.append(f"Netlist `{run.request.netlist}`" + (f", source `{a.source}`" if a.source else "") + (f", probe `{a.probe}`" if a.probe else ""))
        out.append("")
        out.append(_row(["figure", "value"]))
        out.append(_row(["---", "---"]))
        band = a.band
        if band is not None and band.note:
            out.append(_row(["circuit analysed", band.note]))
        if band is not None and band.f_low_hz:
            out.append(_row(["low corner", f"{eng(band.f_low_hz, 'Hz')} exact, {eng(band.f_low_estimate_hz, 'Hz')} "
                             "by short-circuit time constants"]))
        out.append(_row(["sum of time constants", eng(a.sum_tau_s, "s")]))
        out.append(_row(["open-circuit estimate", eng(a.octc_hz, "Hz")]))
        if a.sum_transfer_tau_s is not None:
            out.append(_row(["signal-path estimate", f"{eng(a.elmore_hz, 'Hz')} (sum of transfer time constants "
                             f"{eng(a.sum_transfer_tau_s, 's')})"]))
        out.append(_row(["dominant pole", eng(a.dominant_pole_hz, "Hz")]))
        out.append(_row(["-3 dB", eng(a.f3db_hz, "Hz")]))
        out.append(_row(["estimate vs exact", "-" if a.estimate_error is None else signed_pct(a.estimate_error)]))
        if a.dc_gain is not None and a.source:
            what = "mid-band gain" if band is not None and band.f_low_hz else "low-frequency gain"
            out.append(_row([what, f"{a.dc_gain:.4g} {a.drive_unit or 'from ' + a.source}"]))
        if a.probe and a.probe_reason:
            out.append(_row(["probe", f"`{a.probe}` ({a.probe_reason})"]))
        fix = fix_first_line(a, run.lint.waived)
        if fix:
            out.append(_row(["fix first", fix]))
        for p in a.unstable_poles:
            out.append(_row(["**unstable pole**", f"{eng(abs(p) / 6.283185307179586, 'Hz')} (real part {p.real:+.3g} /s)"]))
        out.append("")
        if band is not None and band.states:
            taus = {e.name: e.tau_s for e in band.low_band}
            out.append(f"### States at mid-band that differ from DC ({len(band.states)})")
            out.append("")
            out.append(_row(["element", "state", "low-band tau", "why"]))
            out.append(_row(["---", "---", "---:", "---"]))
            for name, state in band.states.items():
                out.append(_row([f"`{name}`", state, eng(taus.get(name), "s"), band.reasons.get(name, "")]))
            out.append("")
        on_path = a.on_path_capacitors
        caps = on_path[:top] if top else on_path
        by = "transfer time constant" if a.rank == "transfer" else "open-circuit time constant"
        out.append(f"### Capacitors on the signal path by {by} ({len(caps)} of {len(on_path)})")
        out.append("")
        out.append(_row(["#", "capacitor", "input -> other", "C", "gain", "class", "Miller x", "R seen", "tau", "share",
                         "signal gain", "T", "T share", "pole share", "f without it", "f cascoded"]))
        out.append(_row(["---:", "---", "---", "---:", "---:", "---", "---:", "---:", "---:", "---:",
                         "---:", "---:", "---:", "---:", "---:", "---:"]))
        waived = run.lint.waived
        for k, c in enumerate(caps, start=1):
            out.append(_row([k, f"`{c.name}`" + (" (waived)" if c.name in waived else ""), f"{c.node_in} -> {c.node_out}", eng(c.farads, "F"), _num(c.gain), c.klass,
                             _num(c.factor_in), eng(c.ohms, "ohm"), eng(c.tau_s, "s"), _pct(c.share),
                             _num(c.signal_gain), eng(c.transfer_tau_s, "s"), _pct(c.transfer_share), _pct(c.pole_share),
                             eng(c.octc_hz_if_removed, "Hz"), eng(c.octc_hz_if_cascoded, "Hz")]))
        out.append("")
        off = a.off_path_capacitors
        if off:
            shown = off[:top] if top else off
            more = f" and {len(off) - len(shown)} more" if len(off) > len(shown) else ""
            out.append(f"Off the signal path ({len(off)}; transfer time constant 0): "
                       + ", ".join(f"`{c.name}` ({eng(c.tau_s, 's')} open-circuit)" for c in shown) + more)
            out.append("")
        nodes = a.nodes[:top] if top else a.nodes
        out.append(f"### Nodes ({len(nodes)} of {len(a.nodes)})")
        out.append("")
        out.append(_row(["node", "tau", "share", "Miller share", "T", "T share", "signal Miller", "path", "Miller-dominated"]))
        out.append(_row(["---", "---:", "---:", "---:", "---:", "---:", "---:", "---", "---"]))
        for n in nodes:
            out.append(_row([f"`{n.node}`", eng(n.tau_s, "s"), _pct(n.share), _pct(n.miller_share),
                             eng(n.transfer_tau_s, "s"), _pct(n.transfer_share), _pct(n.signal_miller_share),
                             "signal" if n.on_signal_path else "off", "yes" if n.miller_dominated else ""]))
        out.append("")
        if run.lint.findings:
            out.append("### Findings")
            out.append("")
            out.append(_row(["severity", "rule", "where", "message"]))
            out.append(_row(["---", "---", "---", "---"]))
            for f in run.lint.findings:
                out.append(_row([f.severity, f.rule, f.file + (f":{f.line}" if f.line else ""), f.message]))
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
