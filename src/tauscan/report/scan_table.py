"""The scan report in the terminal: summary, ranked capacitors, ranked nodes, findings."""

from __future__ import annotations

from rich import box
from rich.console import Group
from rich.table import Table
from rich.text import Text

from tauscan.report.console import text_console
from tauscan.units import eng

#: our colours per capacitor class
CLASS_STYLE = {"miller": "bold magenta", "regenerative": "bold red", "bootstrap": "cyan", "grounded": "dim"}
SEVERITY_STYLE = {"error": "bold red", "warning": "yellow", "note": "blue"}


def _pct(x: float | None) -> str:
    if x is None:
        return "-"
    text = f"{100 * x:.1f}%"
    return "0.0%" if text == "-0.0%" else text


def _num(x: float | None, digits: int = 3) -> str:
    return "-" if x is None else f"{x:.{digits}g}"


def summary(run) -> Table:
    a = run.analysis
    grid = Table.grid(padding=(0, 2))
    grid.add_column(style="bold")
    grid.add_column()
    band = a.band
    if band is not None and band.note:
        grid.add_row("circuit analysed", band.note)
    if band is not None and band.f_low_hz:
        grid.add_row("low corner", f"{eng(band.f_low_hz, 'Hz')} exact, {eng(band.f_low_estimate_hz, 'Hz')} "
                     "by short-circuit time constants")
    grid.add_row("sum of time constants", eng(a.sum_tau_s, "s"))
    grid.add_row("open-circuit estimate", eng(a.octc_hz, "Hz"))
    if a.sum_transfer_tau_s is not None:
        grid.add_row("signal-path estimate", eng(a.elmore_hz, "Hz") + f"  (sum of transfer time constants "
                     f"{eng(a.sum_transfer_tau_s, 's')})")
    dom = eng(a.dominant_pole_hz, "Hz")
    if a.dominant_q is not None:
        dom += f" (complex pair, Q = {a.dominant_q:.2f})"
    grid.add_row("dominant pole (exact)", dom)
    where = f" at {a.probe}" if a.probe else ""
    grid.add_row(f"-3 dB{where}", eng(a.f3db_hz, "Hz") + ("" if a.f3db_hz else f"  ({a.f3db_note})"))
    if a.estimate_error is not None:
        grid.add_row("estimate vs exact", f"{100 * a.estimate_error:+.1f}%" + _trust(a))
    if a.dc_gain is not None and a.source:
        what = "mid-band gain" if band is not None and band.f_low_hz else "low-frequency gain"
        grid.add_row(what, f"{a.dc_gain:.4g} {a.drive_unit or 'from ' + a.source}")
    if a.probe and a.probe_reason:
        grid.add_row("probe", f"{a.probe} ({a.probe_reason})")
    for p in a.unstable_poles:
        grid.add_row(Text("unstable pole", style="bold red"), f"{eng(abs(p) / 6.283185307179586, 'Hz')} "
                     f"(real part {p.real:+.3g} /s: right half-plane)")
    return grid


def band_block(run) -> list:
    """The elements whose mid-band state differs from DC, and why."""
    band = run.analysis.band
    if band is None or not band.states:
        return []
    t = Table(title=f"States at mid-band that differ from DC ({len(band.states)})", title_justify="left",
              header_style="bold", box=box.MINIMAL_HEAVY_HEAD)
    for col, justify in (("element", "left"), ("state", "left"), ("low-band tau", "right"), ("why", "left")):
        t.add_column(col, justify=justify, overflow="fold" if col == "why" else None)
    taus = {e.name: e.tau_s for e in band.low_band}
    for name, state in band.states.items():
        t.add_row(name, state, eng(taus.get(name), "s"), band.reasons.get(name, ""))
    return [t]


def _trust(a) -> str:
    if a.dominant_q is not None and a.dominant_q > 0.5:
        return "  (complex dominant poles: the estimate can mislead)"
    if abs(a.estimate_error) > 0.3:
        return "  (far from exact: a zero or close poles)"
    return ""


def capacitor_table(run, top: int | None) -> Table:
    a = run.analysis
    on_path = a.on_path_capacitors
    caps = on_path[:top] if top else on_path
    by = "transfer time constant" if a.rank == "transfer" else "open-circuit time constant"
    where = " on the signal path" if a.rank == "transfer" else ""
    t = Table(title=f"Capacitors{where} by {by} ({len(caps)} of {len(on_path)})", title_justify="left",
              header_style="bold", box=box.MINIMAL_HEAVY_HEAD)
    transfer = a.sum_transfer_tau_s is not None
    columns = [("#", "right"), ("capacitor", "left"), ("input -> other", "left"), ("C", "right"),
               ("gain", "right"), ("class", "left"), ("Miller x", "right"), ("R seen", "right"),
               ("tau", "right"), ("share", "right")]
    if transfer:
        columns += [("signal gain", "right"), ("T", "right"), ("T share", "right")]
    columns += [("pole share", "right"), ("f w/o it", "right"), ("f cascoded", "right")]
    for name, justify in columns:
        t.add_column(name, justify=justify, no_wrap=name in ("capacitor", "class"))
    waived = run.lint.waived
    for k, c in enumerate(caps, start=1):
        name = c.name + (" (waived)" if c.name in waived else "")
        row = [str(k), name, f"{c.node_in} -> {c.node_out}", eng(c.farads, "F"), _num(c.gain),
               Text(c.klass, style=CLASS_STYLE.get(c.klass, "")), _num(c.factor_in), eng(c.ohms, "ohm"),
               eng(c.tau_s, "s"), _pct(c.share)]
        if transfer:
            row += [_num(c.signal_gain), eng(c.transfer_tau_s, "s"), _pct(c.transfer_share)]
        row += [_pct(c.pole_share), eng(c.octc_hz_if_removed, "Hz"), eng(c.octc_hz_if_cascoded, "Hz")]
        t.add_row(*row)
    return t


def off_path_block(run, top: int | None) -> list:
    """Capacitors the drive or the probe does not reach: listed, never ranked with the rest."""
    off = run.analysis.off_path_capacitors
    if not off:
        return []
    shown = off[:top] if top else off
    names = ", ".join(f"{c.name} ({eng(c.tau_s, 's')} open-circuit)" for c in shown)
    more = f" and {len(off) - len(shown)} more" if len(off) > len(shown) else ""
    return [Text(f"Off the signal path ({len(off)}; transfer time constant 0): {names}{more}", style="dim")]


def node_table(run, top: int | None) -> Table:
    a = run.analysis
    nodes = a.nodes[:top] if top else a.nodes
    t = Table(title=f"Nodes by time constant ({len(nodes)} of {len(a.nodes)})", title_justify="left", header_style="bold", box=box.MINIMAL_HEAVY_HEAD)
    transfer = a.sum_transfer_tau_s is not None
    names = ["node", "tau", "share", "Miller share"] + (["T", "T share", "signal Miller", "path"] if transfer else []) + [""]
    for name in names:
        t.add_column(name, justify="left" if name in ("node", "", "path") else "right")
    for n in nodes:
        flag = Text("Miller-dominated", style="bold magenta") if n.miller_dominated else Text("")
        row = [n.node, eng(n.tau_s, "s"), _pct(n.share), _pct(n.miller_share)]
        if transfer:
            row += [eng(n.transfer_tau_s, "s"), _pct(n.transfer_share), _pct(n.signal_miller_share),
                    "signal" if n.on_signal_path else "off"]
        t.add_row(*row, flag)
    return t


def findings_block(run) -> list:
    out = []
    if run.lint.findings:
        t = Table(title="Findings", title_justify="left", header_style="bold", box=box.MINIMAL_HEAVY_HEAD)
        for col in ("severity", "rule", "where", "message"):
            t.add_column(col, overflow="fold")
        for f in run.lint.findings:
            t.add_row(Text(f.severity, style=SEVERITY_STYLE.get(f.severity, "")), f.rule, f"{f.file}:{f.line or ''}", f.message)
        out.append(t)
    if run.lint.waivers:
        t = Table(title="Waivers in use", title_justify="left", header_style="bold", box=box.MINIMAL_HEAVY_HEAD)
        for col in ("capacitor", "reason", "from"):
            t.add_column(col, overflow="fold")
        for w in run.lint.waivers:
            t.add_row(w.capacitor, w.reason, w.source)
        out.append(t)
    for w in run.analysis.warnings:
        out.append(Text(f"warning: {w}", style="yellow"))
    return out


def renderables(run, top: int | None = 20) -> Group:
    a = run.analysis
    head = Text.assemble((a.title or "", "bold"), f"  {run.request.netlist}")
    if a.source:
        head.append(f"  source {a.source}" + (f", probe {a.probe}" if a.probe else ""))
    parts = [head, summary(run), *band_block(run), capacitor_table(run, top), *off_path_block(run, top),
             node_table(run, top)]
    parts.extend(findings_block(run))
    parts.append(Text("First-order estimates from device models: they point where to look, not a substitute for simulation.", style="dim"))
    return Group(*parts)


def render(runs: list, top: int | None = 20, width: int = 140) -> str:
    console = text_console(width)
    for run in runs:
        console.print(renderables(run, top))
    return console.export_text()


def print_to_terminal(runs: list, top: int | None = 20) -> None:
    from rich.console import Console

    console = Console()
    if not console.is_terminal:
        console = Console(width=160)
    for run in runs:
        console.print(renderables(run, top))
