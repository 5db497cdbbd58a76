"""``tauscan expand``: the flat circuit as a table or as JSON."""

from __future__ import annotations

import json

from tauscan.circuit import Circuit
from tauscan.report.console import text_console
from tauscan.units import eng

_UNITS = {"r": "ohm", "c": "F", "l": "H", "v": "V", "i": "A"}


def render_json(circuit: Circuit) -> str:
    return json.dumps(circuit.to_json(), indent=2) + "\n"


def render_table(circuit: Circuit, width: int | None = None) -> str:
    from rich.table import Table

    console = text_console(width or 120)
    console.print(f"[bold]{circuit.title}[/bold]  ({circuit.file})")
    table = Table(title=f"{len(circuit.elements)} elements", title_justify="left")
    for column in ("element", "nodes", "value", "model", "parameters", "line"):
        table.add_column(column)
    for e in circuit.elements:
        value = eng(e.value, _UNITS.get(e.kind, "")) if e.value is not None else ""
        params = " ".join(f"{k}={eng(v)}" for k, v in e.params.items())
        table.add_row(e.name, " ".join(e.nodes or e.control), value, e.model or "", params, f"{e.line}")
    console.print(table)
    if circuit.models:
        mt = Table(title=f"{len(circuit.models)} models", title_justify="left")
        mt.add_column("model")
        mt.add_column("type")
        mt.add_column("parameters")
        for m in circuit.models.values():
            mt.add_row(m.name, m.type, " ".join(f"{k}={v:g}" for k, v in m.params.items()))
        console.print(mt)
    for w in circuit.warnings:
        console.print(f"warning: {w}")
    return console.export_text()
