"""``tauscan check``: one line per netlist, then every finding, then the waivers in use."""

from __future__ import annotations

from rich import box
from rich.console import Group
from rich.table import Table
from rich.text import Text

from tauscan.report.console import text_console
from tauscan.report.scan_table import SEVERITY_STYLE
from tauscan.units import eng


def _bandwidth(run) -> float:
    a = run.analysis
    return a.f3db_hz or a.octc_hz or float("inf")


def worst_corners(runs: list) -> set[int]:
    """Indices of the run with the lowest bandwidth for each netlist scanned at several corners."""
    by_netlist: dict[str, list[int]] = {}
    for k, run in enumerate(runs):
        by_netlist.setdefault(run.request.netlist, []).append(k)
    # the nominal case of a netlist scanned at corners competes with them
    return {min(ks, key=lambda k: _bandwidth(runs[k])) for ks in by_netlist.values()
            if len(ks) > 1 and any(runs[k].request.corner for k in ks)}


def renderables(runs: list, code: int) -> Group:
    corners = any(run.request.corner for run in runs)
    worst = worst_corners(runs)
    overview = Table(title="Netlists", title_justify="left", header_style="bold", box=box.MINIMAL_HEAVY_HEAD)
    floors = any(run.lint.floor for run in runs)
    columns = (["netlist"] + (["corner"] if corners else [])
               + ["source -> probe", "signal-path estimate", "-3 dB"] + (["floor", "margin"] if floors else [])
               + ["errors", "warnings", "notes"])
    for col in columns:
        overview.add_column(col, justify="left" if col in ("netlist", "corner", "source -> probe") else "right")
    for k, run in enumerate(runs):
        a = run.analysis
        counts = {s: sum(1 for f in run.lint.findings if f.severity == s) for s in ("error", "warning", "note")}
        cells = [run.request.netlist]
        if corners:
            cells.append((run.request.corner or "nominal") + (" (worst)" if k in worst else ""))
        path = f"{a.source} -> {a.probe}" if a.source and a.probe else "-"
        estimate = eng(a.elmore_hz, "Hz") if a.elmore_hz else eng(a.octc_hz, "Hz") + " (open-circuit)"
        cells += [path, estimate, eng(a.f3db_hz, "Hz")]
        if floors:
            fl = run.lint.floor
            if fl is None:
                cells += ["-", "-"]
            else:
                judged = "" if fl["judged"] == "f3db" else f" ({'signal-path' if fl['judged'] == 'elmore' else 'open-circuit'})"
                margin = "-" if fl["margin"] is None else f"{100 * fl['margin']:+.1f}%{judged}"
                cells += [eng(fl["floor_hz"], "Hz"), margin]
        cells += [ str(counts["error"]), str(counts["warning"]), str(counts["note"])]
        overview.add_row(*cells, style="bold" if k in worst else None)
    parts = [overview]
    for run in runs:
        a = run.analysis
        if a.probe:
            parts.append(Text(f"{run.request.netlist}: probe {a.probe} ({a.probe_reason or 'as asked'}), "
                              f"gain {a.drive_unit or 'from ' + str(a.source)}; "
                              + (a.band.note if a.band is not None else ""), style="dim"))
    findings = [(run.request.corner, f) for run in runs for f in run.lint.findings]
    if findings:
        t = Table(title="Findings", title_justify="left", header_style="bold", box=box.MINIMAL_HEAVY_HEAD)
        for col in ("severity", "rule", "where", *(["corner"] if corners else []), "message"):
            t.add_column(col, overflow="fold")
        for corner, f in findings:
            where = f.file + (f":{f.line}" if f.line else "")
            t.add_row(Text(f.severity, style=SEVERITY_STYLE.get(f.severity, "")), f.rule, where,
                      *([corner or "nominal"] if corners else []), f.message)
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
