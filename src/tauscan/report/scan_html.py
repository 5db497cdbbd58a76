"""The report as one self-contained HTML file, for a CI artifact: no network (styles, script
and the plot inline), sortable tables, findings linked to their file and line.

Every piece of text from a netlist is escaped; the plot is matplotlib's SVG with its text kept
as text.  Sorting: a click on a column's header sorts by it (again: the other way); a link
ending in ``#sort=TABLE:COLUMN`` (``#sort=caps-1:tau`` or ``:-tau`` for descending) opens the
report sorted so.
"""

from __future__ import annotations

import html
import os
from urllib.parse import quote

from tauscan.report.scan_table import num, pct, summary_rows
from tauscan.units import eng

STYLE = """
body { font: 14px/1.4 system-ui, sans-serif; margin: 1.5em auto; max-width: 1200px; color: #1d2a33; padding: 0 1em; }
h1 { font-size: 1.5em; } h2 { font-size: 1.2em; margin-top: 2em; border-bottom: 1px solid #ccd; }
h3 { font-size: 1em; margin-top: 1.5em; }
.caution { background: #fff6e0; border-left: 4px solid #e0a030; padding: 0.5em 0.8em; }
table { border-collapse: collapse; margin: 0.5em 0; }
th, td { padding: 0.2em 0.6em; border-bottom: 1px solid #e3e6ea; text-align: left; white-space: nowrap; }
td.n { text-align: right; font-variant-numeric: tabular-nums; }
table.sortable th { cursor: pointer; user-select: none; background: #f2f4f7; }
table.sortable th[aria-sort="ascending"]::after { content: " \\25B2"; }
table.sortable th[aria-sort="descending"]::after { content: " \\25BC"; }
.summary th { background: none; font-weight: 600; } .summary td { white-space: normal; }
.miller { color: #8e3b8e; font-weight: 600; } .regenerative { color: #c0392b; font-weight: 600; }
.bootstrap { color: #2a9d8f; } .grounded { color: #6b7785; }
.error { color: #c0392b; font-weight: 600; } .warning { color: #a06000; } .note { color: #2060a0; }
figure { margin: 1em 0; } figure svg { max-width: 100%; height: auto; }
.muted { color: #6b7785; }
"""

SCRIPT = """
(function () {
  function key(cell) {
    var v = cell.getAttribute('data-v');
    if (v !== null && v !== '') { return [0, parseFloat(v)]; }
    return [1, cell.textContent.trim().toLowerCase()];
  }
  function sortBy(table, index, descending) {
    var body = table.tBodies[0];
    var rows = Array.prototype.slice.call(body.rows);
    rows.sort(function (a, b) {
      var x = key(a.cells[index]), y = key(b.cells[index]);
      if (x[0] !== y[0]) { return x[0] - y[0]; }
      var c = x[1] < y[1] ? -1 : (x[1] > y[1] ? 1 : 0);
      return descending ? -c : c;
    });
    rows.forEach(function (r) { body.appendChild(r); });
    Array.prototype.forEach.call(table.tHead.rows[0].cells, function (th, j) {
      if (j === index) { th.setAttribute('aria-sort', descending ? 'descending' : 'ascending'); }
      else { th.removeAttribute('aria-sort'); }
    });
  }
  Array.prototype.forEach.call(document.querySelectorAll('table.sortable'), function (table) {
    Array.prototype.forEach.call(table.tHead.rows[0].cells, function (th, j) {
      th.addEventListener('click', function () {
        sortBy(table, j, th.getAttribute('aria-sort') === 'ascending');
      });
    });
  });
  var m = /#sort=([\\w-]+):(-?)([\\w-]+)/.exec(window.location.hash);
  if (m) {
    var table = document.getElementById(m[1]);
    if (table) {
      Array.prototype.forEach.call(table.tHead.rows[0].cells, function (th, j) {
        if (th.getAttribute('data-key') === m[3]) { sortBy(table, j, m[2] === '-'); }
      });
    }
  }
  document.body.setAttribute('data-ready', 'yes');
})();
"""


def _e(text) -> str:
    return html.escape("" if text is None else str(text), quote=True)


def _link(file: str, line: int | None) -> str:
    """A finding's place as a link to the file (``file:///...``), shown as file:line."""
    shown = f"{file}:{line}" if line else file
    if not file:
        return ""
    url = "file://" + quote(os.path.abspath(file)) + (f"#L{line}" if line else "")
    return f'<a href="{_e(url)}">{_e(shown)}</a>'


def _cell(text: str, value: float | None = None, numeric: bool = True, klass: str = "") -> str:
    attrs = ""
    if value is not None and value == value:
        attrs += f' data-v="{value!r}"'
    cls = " ".join(c for c in ("n" if numeric else "", klass) if c)
    if cls:
        attrs += f' class="{cls}"'
    return f"<td{attrs}>{_e(text)}</td>"


def _table(table_id: str, headers: list[tuple[str, str]], rows: list[str]) -> str:
    head = "".join(f'<th data-key="{_e(key)}" scope="col">{_e(label)}</th>' for key, label in headers)
    return (f'<table class="sortable" id="{_e(table_id)}"><thead><tr>{head}</tr></thead>'
            f"<tbody>{''.join(rows)}</tbody></table>")


def _summary(run) -> str:
    body = "".join(f"<tr><th scope=\"row\">{_e(label)}</th><td>{_e(value)}</td></tr>"
                   for label, value, _ in summary_rows(run))
    return f'<table class="summary">{body}</table>'


def _capacitors(run, k: int, top: int | None) -> str:
    a = run.analysis
    caps = a.on_path_capacitors[:top] if top else a.on_path_capacitors
    transfer = a.sum_transfer_tau_s is not None
    headers = [("rank", "#"), ("capacitor", "capacitor"), ("nodes", "nodes"), ("c", "C"), ("gain", "gain"),
               ("class", "class"), ("miller", "Miller x"), ("r", "R seen"), ("tau", "tau"), ("share", "share")]
    if transfer:
        headers += [("signal-gain", "signal gain"), ("t", "T"), ("t-share", "T share")]
    headers += [("f-without", "f w/o it"), ("waiver", "waiver")]
    waived = run.lint.waived
    rows = []
    for i, c in enumerate(caps, start=1):
        cells = [_cell(str(i), i), _cell(c.name, numeric=False), _cell(f"{c.node_in} -> {c.node_out}", numeric=False),
                 _cell(eng(c.farads, "F"), c.farads), _cell(num(c.gain), c.gain),
                 _cell(c.klass, numeric=False, klass=c.klass), _cell(num(c.factor_in), c.factor_in),
                 _cell(eng(c.ohms, "ohm"), c.ohms), _cell(eng(c.tau_s, "s"), c.tau_s), _cell(pct(c.share), c.share)]
        if transfer:
            cells += [_cell(num(c.signal_gain), c.signal_gain), _cell(eng(c.transfer_tau_s, "s"), c.transfer_tau_s),
                      _cell(pct(c.transfer_share), c.transfer_share)]
        cells += [_cell(eng(c.octc_hz_if_removed, "Hz"), c.octc_hz_if_removed),
                  _cell(waived.get(c.name, ""), numeric=False)]
        rows.append("<tr>" + "".join(cells) + "</tr>")
    by = "transfer time constant" if a.rank == "transfer" else "open-circuit time constant"
    title = f"Capacitors on the signal path by {by} ({len(caps)} of {len(a.on_path_capacitors)})"
    out = f"<h3>{_e(title)}</h3>" + _table(f"caps-{k}", headers, rows)
    off = a.off_path_capacitors
    if off:
        shown = off[:top] if top else off
        rows = ["<tr>" + _cell(c.name, numeric=False) + _cell(f"{c.node_in} -> {c.node_out}", numeric=False)
                + _cell(eng(c.farads, "F"), c.farads) + _cell(eng(c.tau_s, "s"), c.tau_s) + "</tr>" for c in shown]
        out += (f"<h3>Off the signal path ({len(off)}; transfer time constant 0)</h3>"
                + _table(f"off-{k}", [("capacitor", "capacitor"), ("nodes", "nodes"), ("c", "C"),
                                      ("tau", "open-circuit tau")], rows))
    return out


def _nodes(run, k: int, top: int | None) -> str:
    a = run.analysis
    nodes = a.nodes[:top] if top else a.nodes
    headers = [("node", "node"), ("tau", "tau"), ("share", "share"), ("miller-share", "Miller share")]
    transfer = a.sum_transfer_tau_s is not None
    if transfer:
        headers += [("t", "T"), ("t-share", "T share"), ("path", "path")]
    rows = []
    for n in nodes:
        cells = [_cell(n.node, numeric=False), _cell(eng(n.tau_s, "s"), n.tau_s), _cell(pct(n.share), n.share),
                 _cell(pct(n.miller_share), n.miller_share)]
        if transfer:
            cells += [_cell(eng(n.transfer_tau_s, "s"), n.transfer_tau_s), _cell(pct(n.transfer_share), n.transfer_share),
                      _cell("signal" if n.on_signal_path else "off", numeric=False)]
        rows.append("<tr>" + "".join(cells) + "</tr>")
    return f"<h3>Nodes by time constant ({len(nodes)} of {len(a.nodes)})</h3>" + _table(f"nodes-{k}", headers, rows)


def _findings(run) -> str:
    out = ""
    if run.lint.findings:
        items = "".join(f'<li><span class="{_e(f.severity)}">{_e(f.severity)}</span> <code>{_e(f.rule)}</code> '
                        f"{_link(f.file, f.line)}: {_e(f.message)}</li>" for f in run.lint.findings)
        out += f"<h3>Findings ({len(run.lint.findings)})</h3><ul>{items}</ul>"
    if run.lint.waivers:
        items = "".join(f"<li><code>{_e(w.capacitor)}</code>: {_e(w.reason)} <span class=\"muted\">({_e(w.source)})"
                        "</span></li>" for w in run.lint.waivers)
        out += f"<h3>Waivers in use</h3><ul>{items}</ul>"
    if run.analysis.warnings:
        items = "".join(f"<li>{_e(w)}</li>" for w in run.analysis.warnings)
        out += f'<h3>Warnings</h3><ul class="warning">{items}</ul>'
    return out


def _figure(run, top: int | None) -> str:
    from tauscan.errors import SettingsError
    from tauscan.report import plot

    try:
        plot.check("inline.svg")
    except SettingsError as exc:  # no matplotlib: the report says so and goes on
        return f'<p class="muted">No plot: {_e(exc.message)}</p>'
    svg = plot.render_all([run], "inline.svg", top).decode("utf-8")
    start = svg.find("<svg")
    if start < 0:
        return ""
    svg = svg[start:]
    lo, hi = svg.find("<metadata>"), svg.find("</metadata>")
    if 0 <= lo < hi:  # matplotlib's RDF block: nothing a reader of the report needs
        svg = svg[:lo] + svg[hi + len("</metadata>"):]
    return f'<figure aria-label="shares and response">{svg}</figure>'



def render(runs: list, top: int | None = 20, exit_code: int | None = None, failures: list | None = None) -> str:
    sections = []
    for k, run in enumerate(runs, start=1):
        a = run.analysis
        where = _e(run.request.netlist) + (f" &middot; corner {_e(run.request.corner)}" if run.request.corner else "")
        sections.append(f'<section id="run-{k}"><h2>{_e(a.title or run.request.netlist)}</h2>'
                        f'<p class="muted">{where}'
                        + (f" &middot; source {_e(a.source)}" if a.source else "")
                        + (f" &middot; probe {_e(a.probe)}" if a.probe else "") + "</p>"
                        + _summary(run) + _figure(run, top) + _capacitors(run, k, top) + _nodes(run, k, top)
                        + _findings(run) + "</section>")
    failed = ""
    if failures:
        items = "".join(f"<li>{_link(f.file or f.netlist, f.line)}: {_e(f.headline)}</li>" for f in failures)
        failed = f'<section id="failures"><h2>Netlists that could not be scanned ({len(failures)})</h2><ul class="error">{items}</ul></section>'
    gate = "" if exit_code is None else f"<p>Exit code of the gate: <b>{exit_code}</b></p>"
    title = "tauscan report" + (f": {runs[0].analysis.title}" if len(runs) == 1 and runs[0].analysis.title else "")
    return ("<!doctype html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
            f"<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\"><title>{_e(title)}</title>"
            f"<style>{STYLE}</style></head><body><h1>{_e(title)}</h1>"
            "<p class=\"caution\">First-order estimates from device models and an operating point: they point where "
            "to look, and never replace full simulation and the sign-off flow a design team or foundry requires.</p>"
            + gate + failed + "".join(sections) + f"<script>{SCRIPT}</script></body></html>\n")
