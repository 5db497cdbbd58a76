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
    grid.add_row("sum of time constants", eng(a.sum_tau_s, "s"))
    grid.add_row("open-circuit estimate", eng(a.octc_hz, "Hz"))
    dom = eng(a.dominant_pole_hz, "Hz")
    if a.dominant_q is not None:
        dom += f" (complex pair, Q = {a.dominant_q:.2f})"
    grid.add_row("dominant pole (exact)", dom)
    where = f" at {a.probe}" if a.probe else ""
    grid.add_row(f"-3 dB{where}", eng(a.f3db_hz, "Hz") + ("" if a.f3db_hz else f"  ({a.f3db_note})"))
    if a.estimate_error is not None:
        grid.add_row("estimate vs exact", f"{100 * a.estimate_error:+.1f}%" + _trust(a))
    if a.dc_gain is not None and a.source:
        grid.add_row("low-frequency gain", f"{a.dc_gain:.4g} from {a.source}")
    return grid


def _trust(a) -> str:
    if a.dominant_q is not None and a.dominant_q > 0.5:
        return "  (complex dominant poles: the estimate can mislead)"
    if abs(a.estimate_error) > 0.3:
        return "  (far from exact: a zero or close poles)"
    return ""


def capacitor_table(run, top: int | None) -> Table:
    a = run.analysis
    caps = a.capacitors[:top] if top else a.capacitors
    t = Table(title=f"Capacitors by time constant ({len(caps)} of {len(a.capacitors)})", title_justify="left", header_style="bold", box=box.MINIMAL_HEAVY_HEAD)
    for name, justify in (("#", "right"), ("capacitor", "left"), ("input -> other", "left"), ("C", "right"),
                          ("gain", "right"), ("class", "left"), ("Miller x", "right"), ("R seen", "right"),
                          ("tau", "right"), ("share", "right"), ("pole share", "right"), ("f w/o it", "right"),
                          ("f cascoded", "right")):
        t.add_column(name, justify=justify, no_wrap=name in ("capacitor", "class"))
    waived = run.lint.waived
    for k, c in enumerate(caps, start=1):
        name = c.name + (" (waived)" if c.name in waived else "")
        t.add_row(
            str(k), name, f"{c.node_in} -> {c.node_out}", eng(c.farads, "F"), _num(c.gain),
            Text(c.klass, style=CLASS_STYLE.get(c.klass, "")), _num(c.factor_in), eng(c.ohms, "ohm"),
            eng(c.tau_s, "s"), _pct(c.share), _pct(c.pole_share), eng(c.octc_hz_if_removed, "Hz"),
            eng(c.octc_hz_if_cascoded, "Hz"),
        )
    return t


def node_table(run, top: int | None) -> Table:
    a = run.analysis
    nodes = a.nodes[:top] if top else a.nodes
    t = Table(title=f"Nodes by time constant ({len(nodes)} of {len(a.nodes)})", title_justify="left", header_style="bold", box=box.MINIMAL_HEAVY_HEAD)
    for name in ("node", "tau", "share", "Miller share", ""):
        t.add_column(name, justify="left" if name in ("node", "") else "right")
    for n in nodes:
        flag = Text("Miller-dominated", style="bold magenta") if n.miller_dominated else Text("")
        t.add_row(n.node, eng(n.tau_s, "s"), _pct(n.share), _pct(n.miller_share), flag)
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
    parts = [head, summary(run), capacitor_table(run, top), node_table(run, top)]
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
