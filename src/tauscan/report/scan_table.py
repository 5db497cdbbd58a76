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


def pct(x: float | None) -> str:
    if x is None:
        return "-"
    text = f"{100 * x:.1f}%"
    return "0.0%" if text == "-0.0%" else text


def num(x: float | None, digits: int = 3) -> str:
    """A gain or factor: plain digits up to 1e6 (never ``1e+05``), no ``-0``."""
    if x is None or x != x:
        return "-"
    if abs(x) < 10 ** (digits - 1) * 1e-12:
        return "0"
    text = f"{x:.{digits}g}"
    if "e" in text and 1e-3 <= abs(x) < 1e6:
        text = f"{x:.0f}" if abs(x) >= 10 ** digits else f"{x:.{digits}f}".rstrip("0").rstrip(".")
    return "0" if text in ("-0", "-0.0") else text


def signed_pct(x: float) -> str:
    """A signed percentage, never ``-0.0%``."""
    text = f"{100 * x:+.1f}%"
    return "0.0%" if text in ("-0.0%", "+0.0%") else text


def summary_rows(run, width: int | None = None) -> list[tuple[str, str, str]]:
    """The summary as (label, value, label style) rows, shared by the terminal table and the
    HTML report (``width``: names in the 'fix first' line elided to fit it)."""
    a = run.analysis
    rows: list[tuple[str, str, str]] = []
    band = a.band
    if band is not None and band.note:
        rows.append(("circuit analysed", band.note, ""))
    if band is not None and band.f_low_hz:
        rows.append(("low corner", f"{eng(band.f_low_hz, 'Hz')} exact, {eng(band.f_low_estimate_hz, 'Hz')} "
                     "by short-circuit time constants", ""))
    rows.append(("sum of time constants", eng(a.sum_tau_s, "s"), ""))
    rows.append(("open-circuit estimate", eng(a.octc_hz, "Hz"), ""))
    if a.sum_transfer_tau_s is not None:
        rows.append(("signal-path estimate", eng(a.elmore_hz, "Hz") + f"  (sum of transfer time constants "
                     f"{eng(a.sum_transfer_tau_s, 's')})", ""))
    dom = eng(a.dominant_pole_hz, "Hz")
    if a.dominant_q is not None:
        dom += f" (complex pair, Q = {a.dominant_q:.2f})"
    rows.append(("dominant pole (exact)", dom, ""))
    where = f" at {a.probe}" if a.probe else ""
    rows.append((f"-3 dB{where}", eng(a.f3db_hz, "Hz") + ("" if a.f3db_hz else f"  ({a.f3db_note})"), ""))
    if a.estimate_error is not None:
        rows.append(("estimate vs exact", signed_pct(a.estimate_error) + _trust(a), ""))
    if a.dc_gain is not None and a.source:
        what = "mid-band gain" if band is not None and band.f_low_hz else "low-frequency gain"
        rows.append((what, f"{a.dc_gain:.4g} {a.drive_unit or 'from ' + a.source}", ""))
    if a.probe and a.probe_reason:
        rows.append(("probe", f"{a.probe} ({a.probe_reason})", ""))
    fix = fix_first_line(a, run.lint.waived, name_limit(width))
    if fix:
        rows.append(("fix first", fix, "bold"))
    for p in a.unstable_poles:
        rows.append(("unstable pole", f"{eng(abs(p) / 6.283185307179586, 'Hz')} "
                     f"(real part {p.real:+.3g} /s: right half-plane)", "bold red"))
    return rows


def summary(run, width: int | None = None) -> Table:
    grid = Table.grid(padding=(0, 2))
    grid.add_column(style="bold")
    grid.add_column()
    for label, value, style in summary_rows(run, width):
        grid.add_row(Text(label, style=style) if style else label, value)
    return grid


def fix_first_line(a, waived=(), limit: int = 0) -> str:
    """One line naming the capacitor whose removal raises the estimate most, with the figure
    (waived capacitors are accepted by design and left out; ``limit``: the longest name shown)."""
    fix = a.fix_first(waived) if not a.unstable_poles else None
    if not fix or not fix.get("hz_without"):
        return ""
    line = (f"{elide_middle(fix['capacitor'], limit)}: without it the {fix['estimate']} estimate rises from {eng(fix['hz'], 'Hz')} "
            f"to {eng(fix['hz_without'], 'Hz')}")
    if fix.get("octc_hz_if_cascoded") and a.octc_hz:
        line += (f"; cascoded (gain across it cut to -1) the open-circuit estimate goes from {eng(a.octc_hz, 'Hz')} "
                 f"to {eng(fix['octc_hz_if_cascoded'], 'Hz')}")
    return line


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


#: a column's share of the width beyond its text: rich's padding and the rule between columns
_COLUMN_EDGE = 3

#: ``--columns`` keys of the capacitor table -> its headers ('#' always stands first)
TABLE_COLUMNS = {
    "capacitor": "capacitor", "nodes": "nodes", "c": "C", "gain": "gain", "class": "class",
    "miller": "Miller x", "r": "R seen", "tau": "tau", "share": "share", "signal-gain": "signal gain",
    "t": "T", "t-share": "T share", "pole-share": "pole share", "f-without": "f w/o it", "f-cascoded": "f cascoded",
}


def parse_columns(text: str | None) -> tuple[str, ...] | None:
    """``--columns`` (comma-separated keys of :data:`TABLE_COLUMNS`) -> the headers, in
    table order; None for the default choice by width.  Raises SettingsError for an unknown key."""
    if text is None:
        return None
    from tauscan.errors import SettingsError, did_you_mean

    keys = [k.strip().lower() for k in text.split(",") if k.strip()]
    if not keys:
        raise SettingsError("--columns needs one or more column names (" + ", ".join(TABLE_COLUMNS) + ")")
    for key in keys:
        if key not in TABLE_COLUMNS:
            raise SettingsError(f"--columns: no column {key!r}{did_you_mean(key, TABLE_COLUMNS)} "
                                f"(columns: {', '.join(TABLE_COLUMNS)})")
    order = list(TABLE_COLUMNS)
    return tuple(TABLE_COLUMNS[k] for k in sorted(set(keys), key=order.index))


def elide_middle(text: str, limit: int) -> str:
    """``text`` shortened to ``limit`` characters by dropping its middle (``x1.x2...m7:cgd``):
    the last hierarchy levels kept whole where they fit (the device and its part), then as
    much of the start as the room leaves."""
    if limit <= 0 or len(text) <= limit:
        return text
    room = limit - 3
    parts = text.split(".")
    tail = parts[-1]
    if len(parts) > 1 and len(tail) <= room - 4:
        k = len(parts) - 2
        while k > 0 and len(tail) + 1 + len(parts[k]) <= room * 2 // 3:
            tail = parts[k] + "." + tail
            k -= 1
        head, j = "", 0
        while j <= k and len(head) + len(parts[j]) + (1 if head else 0) + len(tail) <= room:
            head += ("." if head else "") + parts[j]
            j += 1
        if not head:
            head = parts[0][: room - len(tail)]
        return f"{head}...{tail}"
    back = room - room // 3
    return text[: room - back] + "..." + text[len(text) - back:]


def name_limit(width: int | None) -> int:
    """How long a name or node pair may be in a table at ``width`` (0: no limit)."""
    if width is None:
        return 0
    return max(12, min(40, (width - 60) // 2))


def _fitted(columns: list[tuple[str, str, int]], rows: list[list], width: int | None) -> list[int]:
    """The indices of the columns that fit ``width``, most important first.

    ``columns`` holds (header, justify, priority), lower priority numbers kept first; a
    column goes whole or not at all, so that a number is never split from its unit."""
    if width is None:
        return list(range(len(columns)))
    need = _needs(columns, rows)
    order = sorted(range(len(columns)), key=lambda j: columns[j][2])
    kept, used = [], 4  # the table's own edges
    for j in order:
        if used + need[j] > width and kept:
            break  # a less important column never takes the place of a more important one
        kept.append(j)
        used += need[j]
    return sorted(kept)


def _needs(columns: list[tuple[str, str, int]], rows: list[list]) -> list[int]:
    """Characters each column takes: its widest cell or header, and its edge."""
    return [max([len(header), *(len(str(r[j])) for r in rows)]) + _COLUMN_EDGE
            for j, (header, _, _) in enumerate(columns)]


def _spare(columns: list[tuple[str, str, int]], rows: list[list], keep: list[int], width: int | None) -> int:
    """Characters left over at ``width`` by the kept columns."""
    if width is None:
        return 0
    need = _needs(columns, rows)
    return max(0, width - 4 - sum(need[j] for j in keep))


def _table(title: str, columns: list[tuple[str, str, int]], rows: list[list], width: int | None,
           chosen: tuple[str, ...] | None = None) -> Table:
    if chosen is not None:  # --columns: those, whatever the width
        keep = [j for j, (name, _, _) in enumerate(columns) if name == "#" or name in chosen]
    else:
        keep = _fitted(columns, rows, width)
    dropped = len(columns) - len(keep)
    if dropped and chosen is None:
        title += f"  [{dropped} column{'s' if dropped > 1 else ''} left out at this width (--columns picks them): JSON has them all]"
    t = Table(title=title, title_justify="left", header_style="bold", box=box.MINIMAL_HEAVY_HEAD)
    for j in keep:
        name, justify, _ = columns[j]
        t.add_column(name, justify=justify, no_wrap=True)
    for r in rows:
        t.add_row(*[r[j] for j in keep])
    return t


def capacitor_table(run, top: int | None, width: int | None = None, chosen: tuple[str, ...] | None = None) -> Table:
    a = run.analysis
    on_path = a.on_path_capacitors
    caps = on_path[:top] if top else on_path
    by = "transfer time constant" if a.rank == "transfer" else "open-circuit time constant"
    where = " on the signal path" if a.rank == "transfer" else ""
    transfer = a.sum_transfer_tau_s is not None
    # (header, justify, priority): the essential columns first, the what-if ones last
    columns = [("#", "right", 4), ("capacitor", "left", 0), ("nodes", "left", 1), ("C", "right", 1),
               ("gain", "right", 2), ("class", "left", 2), ("Miller x", "right", 7), ("R seen", "right", 8),
               ("tau", "right", 3 if not transfer else 5), ("share", "right", 3 if not transfer else 5)]
    if transfer:
        columns += [("signal gain", "right", 4), ("T", "right", 3), ("T share", "right", 3)]
    columns += [("pole share", "right", 9), ("f w/o it", "right", 6), ("f cascoded", "right", 10)]
    waived = run.lint.waived

    def rows_at(limit: int) -> list[list]:
        rows = []
        for k, c in enumerate(caps, start=1):
            name = elide_middle(c.name, limit) + (" (waived)" if c.name in waived else "")
            nodes = f"{elide_middle(c.node_in, limit // 2)} -> {elide_middle(c.node_out, limit // 2)}" \
                if limit and len(c.node_in) + len(c.node_out) + 4 > limit else f"{c.node_in} -> {c.node_out}"
            row = [str(k), name, nodes, eng(c.farads, "F"), num(c.gain),
                   Text(c.klass, style=CLASS_STYLE.get(c.klass, "")), num(c.factor_in), eng(c.ohms, "ohm"),
                   eng(c.tau_s, "s"), pct(c.share)]
            if transfer:
                row += [num(c.signal_gain), eng(c.transfer_tau_s, "s"), pct(c.transfer_share)]
            row += [pct(c.pole_share), eng(c.octc_hz_if_removed, "Hz"), eng(c.octc_hz_if_cascoded, "Hz")]
            rows.append(row)
        return rows

    title = f"Capacitors{where} by {by} ({len(caps)} of {len(on_path)})"
    limit = name_limit(width)
    rows = rows_at(limit)
    if limit and chosen is None:  # the width the chosen columns leave goes to the names
        spare = _spare(columns, rows, _fitted(columns, rows, width), width)
        if spare:
            rows = rows_at(limit + spare)
    return _table(title, columns, rows, width, chosen)


def off_path_block(run, top: int | None, width: int | None = None) -> list:
    """Capacitors the drive or the probe does not reach: listed apart, never ranked with the
    rest (a small table, so that no number is split from its unit)."""
    off = run.analysis.off_path_capacitors
    if not off:
        return []
    shown = off[:top] if top else off
    more = f", {len(off) - len(shown)} more in JSON" if len(off) > len(shown) else ""
    limit = name_limit(width)
    rows = [[elide_middle(c.name, limit), f"{elide_middle(c.node_in, limit // 2)} -> {elide_middle(c.node_out, limit // 2)}",
             eng(c.farads, "F"), eng(c.tau_s, "s")] for c in shown]
    columns = [("capacitor", "left", 0), ("nodes", "left", 1), ("C", "right", 1), ("open-circuit tau", "right", 0)]
    table = _table(f"Off the signal path ({len(off)}{more}; transfer time constant 0)", columns, rows, width)
    table.style = "dim"
    return [table]


def node_table(run, top: int | None, width: int | None = None) -> Table:
    a = run.analysis
    nodes = a.nodes[:top] if top else a.nodes
    transfer = a.sum_transfer_tau_s is not None
    columns = [("node", "left", 0), ("tau", "right", 1), ("share", "right", 1), ("Miller share", "right", 3)]
    if transfer:
        columns += [("T", "right", 0), ("T share", "right", 0), ("signal Miller", "right", 2), ("path", "left", 2)]
    columns += [("flag", "left", 1)]
    rows = []
    for n in nodes:
        flag = Text("Miller-dominated", style="bold magenta") if n.miller_dominated else Text("-")
        row = [elide_middle(n.node, name_limit(width)), eng(n.tau_s, "s"), pct(n.share), pct(n.miller_share)]
        if transfer:
            row += [eng(n.transfer_tau_s, "s"), pct(n.transfer_share), pct(n.signal_miller_share),
                    "signal" if n.on_signal_path else "off"]
        rows.append(row + [flag])
    return _table(f"Nodes by time constant ({len(nodes)} of {len(a.nodes)})", columns, rows, width)


def findings_block(run) -> list:
    out = []
    if run.lint.findings:
        t = Table(title="Findings", title_justify="left", header_style="bold", box=box.MINIMAL_HEAVY_HEAD)
        for col in ("severity", "rule", "where", "message"):
            t.add_column(col, overflow="fold")
        for f in run.lint.findings:
            t.add_row(Text(f.severity, style=SEVERITY_STYLE.get(f.severity, "")), f.rule, f.file + (f":{f.line}" if f.line else ""), f.message)
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


def renderables(run, top: int | None = 20, width: int | None = None, columns: tuple[str, ...] | None = None) -> Group:
    a = run.analysis
    head = Text.assemble((a.title or "", "bold"), f"  {run.request.netlist}")
    if run.request.corner:
        head.append(f"  corner {run.request.corner}", style="bold")
    if a.source:
        head.append(f"  source {a.source}" + (f", probe {a.probe}" if a.probe else ""))
    parts = [head, summary(run, width), *band_block(run), capacitor_table(run, top, width, columns), *off_path_block(run, top, width),
             node_table(run, top, width)]
    parts.extend(findings_block(run))
    parts.append(Text("First-order estimates from device models: they point where to look, not a substitute for simulation.", style="dim"))
    return Group(*parts)


def render(runs: list, top: int | None = 20, width: int = 140, columns: tuple[str, ...] | None = None) -> str:
    console = text_console(width)
    for run in runs:
        console.print(renderables(run, top, width, columns))
    return console.export_text()


def print_to_terminal(runs: list, top: int | None = 20, columns: tuple[str, ...] | None = None) -> None:
    from rich.console import Console

    console = Console()
    if not console.is_terminal:
        console = Console(width=160)
    for run in runs:
        console.print(renderables(run, top, console.width, columns))
