"""Sub-command handlers: each runs the stages it needs and hands the result to a reporter."""

from __future__ import annotations

import argparse
from collections.abc import Callable


def add_subcommands(sub, add_common: Callable[[argparse.ArgumentParser], None]) -> None:
    """Register the handlers (``expand`` is declared by the CLI itself)."""
    sub.choices["expand"].set_defaults(handler=cmd_expand)

    p = sub.add_parser("op", help="solve and print the DC operating point")
    add_common(p)
    _add_bias_options(p)
    p.add_argument("--format", choices=["table", "json"], default="table")
    p.add_argument("-o", "--output", metavar="FILE", help="write to FILE instead of standard output")
    p.set_defaults(handler=cmd_op)


def _add_bias_options(p: argparse.ArgumentParser) -> None:
    p.add_argument("--temp", type=float, metavar="C", help="temperature in Celsius (overrides .temp)")
    p.add_argument("--op", dest="op_file", metavar="FILE", help="operating point from a file (CSV or JSON; see README)")


def read_circuit(args: argparse.Namespace):
    from tauscan.cli import parse_params
    from tauscan.reader import read_netlist

    return read_netlist(args.netlist, parse_params(args.param))


def solve(args: argparse.Namespace, circuit):
    from tauscan.op import operating_point

    return operating_point(circuit, args.temp, args.op_file)


def cmd_expand(args: argparse.Namespace) -> int:
    from tauscan.report import expand_view
    from tauscan.report.output import write_text

    circuit = read_circuit(args)
    text = expand_view.render_json(circuit) if args.format == "json" else expand_view.render_table(circuit)
    write_text(text, args.output, protect=(args.netlist,))
    return 0


def cmd_op(args: argparse.Namespace) -> int:
    from tauscan.report import op_view
    from tauscan.report.output import write_text

    op = solve(args, read_circuit(args))
    text = op_view.render_json(op) if args.format == "json" else op_view.render_table(op)
    write_text(text, args.output, protect=(args.netlist,))
    return 0
