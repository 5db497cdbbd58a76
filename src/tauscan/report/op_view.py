"""``tauscan op``: node voltages and device operating points, as a table or JSON."""

from __future__ import annotations

import json

from tauscan.devices import registry
from tauscan.op.result import OperatingPoint
from tauscan.report.console import text_console
from tauscan.units import eng


def render_json(op: OperatingPoint) -> str:
    return json.dumps(op.to_json(), indent=2) + "\n"


def _quantity(d, name: str):
    if name == "current":
        return d.current
    return d.values.get(name, d.bias.get(name))


def _figures(d, model) -> str:
    """gm/id (1/V), and the model's own ratios (a bipolar's ic/ib), one per line."""
    out = []
    gm = d.values.get("gm")
    if gm is not None and d.current:
        out.append(f"gm/id={gm / abs(d.current):.3g}/V")
    for label, num, den in model.table_ratios:
        a, b = _quantity(d, num), _quantity(d, den)
        if a is not None and b:
            out.append(f"{label}={a / b:.4g}")
    return "\n".join(out)


def render_table(op: OperatingPoint, width: int = 160) -> str:
    from rich.table import Table

    console = text_console(width)
    console.print(f"[bold]Operating point[/bold] of {op.circuit.file} at {op.temp_c:g} C "
                  f"({op.strategy}, {op.iterations} iterations)")
    nodes = Table(title="Node voltages", title_justify="left")
    nodes.add_column("node")
    nodes.add_column("voltage", justify="right")
    for name, volts in op.node_voltages().items():
        nodes.add_row(name, eng(volts, "V", 4))
    console.print(nodes)
    if op.devices:
        dev = Table(title="Devices", title_justify="left")
        # one quantity per line in the bias and capacitance cells: a value never splits from its unit
        for col in ("device", "type", "region", "current", "bias", "gm", "figures", "out. cond.", "capacitances"):
            dev.add_column(col, justify="right" if col in ("current", "gm", "out. cond.") else "left", no_wrap=True)
        for d in op.devices:
            model = registry.by_name(d.family)
            bias = "\n".join(f"{k}={eng(d.bias[k], 'V')}" for k in model.table_bias if k in d.bias)
            out = eng(d.values[model.output_conductance], "S")
            caps = "\n".join(f"{k}={eng(v, 'F')}" for k, v in d.caps.items() if v)
            mark = " *" if d.overridden else ""
            dev.add_row(d.name + mark, d.type, d.region, eng(d.current, "A"), bias, eng(d.values.get("gm"), "S"),
                        _figures(d, model), out, caps, end_section=True)
        console.print(dev)
        if any(d.overridden for d in op.devices):
            console.print("* values given by the operating-point file")
    for w in op.warnings:
        console.print(f"warning: {w}")
    return console.export_text()
