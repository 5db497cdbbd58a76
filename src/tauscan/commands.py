"""Sub-command handlers: each runs the stages it needs and hands the result to a reporter."""

from __future__ import annotations

import argparse
from collections.abc import Callable


def add_subcommands(sub, add_common: Callable[[argparse.ArgumentParser], None]) -> None:
    """Register the handlers (``expand`` is declared by the CLI itself)."""
    sub.choices["expand"].set_defaults(handler=cmd_expand)


def cmd_expand(args: argparse.Namespace) -> int:
    from tauscan.cli import parse_params
    from tauscan.reader import read_netlist
    from tauscan.report import expand_view
    from tauscan.report.output import write_text

    circuit = read_netlist(args.netlist, parse_params(args.param))
    text = expand_view.render_json(circuit) if args.format == "json" else expand_view.render_table(circuit)
    write_text(text, args.output, protect=(args.netlist,))
    return 0
