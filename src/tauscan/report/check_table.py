"""``tauscan check``: one line per netlist, then every finding, then the waivers in use."""

from __future__ import annotations

from rich import box
from rich.console import Group
from rich.table import Table
from rich.text import Text

from tauscan.report.console import text_console
from tauscan.report.scan_table import SEVERITY_STYLE
from tauscan.units import eng


def renderables(runs: list, code: int) -> Group:
    overview = Table(title="Netlists", title_justify="left", header_style="bold", box=box.MINIMAL_HEAVY_HEAD)
    for col in ("netlist", "estimate", "-3 dB", "errors", "warnings", "notes"):
        overview.add_column(col, justify="left" if col == "netlist" else "right")
    for run in runs:
        a = run.analysis
        counts = {s: sum(1 for f in run.lint.findings if f.severity == s) for s in ("error", "warning", "note")}
        overview.add_row(run.request.netlist, eng(a.octc_hz, "Hz"), eng(a.f3db_hz, "Hz"),
                         str(counts["error"]), str(counts["warning"]), str(counts["note"]))
    parts = [overview]
    findings = [f for run in runs for f in run.lint.findings]
    if findings:
        t = Table(title="Findings", title_justify="left", header_style="bold", box=box.MINIMAL_HEAVY_HEAD)
        for col in ("severity", "rule", "where", "message"):
            t.add_column(col, overflow="fold")
        for f in findings:
            t.add_row(Text(f.severity, style=SEVERITY_STYLE.get(f.severity, "")), f.rule, f"{f.file}:{f.line or ''}", f.message)
        parts.append(t)
    waivers = [w for run in runs for w in run.lint.waivers]
    if waivers:
        t = Table(title="Waivers in use", title_justify="left", header_style="bold", box=box.MINIMAL_HEAVY_HEAD)
        for col in ("capacitor", "reason", "from"):
            t.add_column(col, overflow="fold")
        for w in waivers:
            t.add_row(w.capacitor, w.reason, w.source)
        parts.append(t)
    verdict = "pass" if code == 0 else "fail"
    parts.append(Text(f"{verdict}: {len(findings)} finding(s) in {len(runs)} netlist(s), exit code {code}",
                      style="bold green" if code == 0 else "bold red"))
    return Group(*parts)


def render(runs: list, code: int, width: int = 140) -> str:
    console = text_console(width)
    console.print(renderables(runs, code))
    return console.export_text()


def print_to_terminal(runs: list, code: int) -> None:
    from rich.console import Console

    console = Console()
    if not console.is_terminal:
        console = Console(width=160)
    console.print(renderables(runs, code))
