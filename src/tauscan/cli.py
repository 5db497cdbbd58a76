"""The ``tauscan`` command line.

Sub-commands import their stage and reporter only when asked for, so that
``tauscan --help`` stays fast.  User errors (:class:`TauscanError`) become one
message on stderr and exit code 2, here and nowhere else.
"""

from __future__ import annotations

import argparse
import os
import sys
from collections.abc import Sequence

from tauscan import __version__
from tauscan.errors import EXIT_ERROR, EXIT_FINDINGS, EXIT_OK, SelectionError, SettingsError, TauscanError


class _Parser(argparse.ArgumentParser):
    """argparse that raises our error (exit 2, one line) instead of printing usage and exiting."""

    def error(self, message: str) -> None:  # type: ignore[override]
        raise SettingsError(f"{self.prog}: {message} (see --help)")


def _add_common(p: argparse.ArgumentParser, several: bool = False) -> None:
    if several:
        p.add_argument("netlist", nargs="+", help="SPICE-format netlist files (one report)")
    else:
        p.add_argument("netlist", help="SPICE-format netlist file")
    p.add_argument("--param", action="append", default=[], metavar="NAME=VALUE", help="override a .param (repeatable)")
    p.add_argument("-I", "--include-dir", dest="include_dirs", action="append", default=[], metavar="DIR",
                   help="also look in DIR for .include and .lib files (repeatable; after the including file's folder)")
    p.add_argument("--x-mega", action="store_true", default=None,
                   help="read an x after a number as mega (100x = 1e8), as some simulators do")


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(
        prog="tauscan",
        description="Find the capacitors that limit a circuit's bandwidth: Miller multiplication, "
        "open-circuit time constants and exact poles from a SPICE netlist.",
    )
    parser.add_argument("--version", action="version", version=f"tauscan {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)

    p = sub.add_parser("expand", help="print the flat circuit the reader produces")
    _add_common(p)
    p.add_argument("--format", choices=["table", "json"], default="table")
    p.add_argument("-o", "--output", metavar="FILE", help="write to FILE instead of standard output")

    from tauscan import commands

    commands.add_subcommands(sub, _add_common)
    return parser


def run(argv: Sequence[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if args.command is None:
        parser.print_help()
        return EXIT_ERROR
    return args.handler(args)


#: Thread pools of the BLAS libraries behind numpy: one thread each unless the user says
#: otherwise.  The work is sparse (SuperLU is single-threaded) and small dense blocks, and
#: spinning BLAS threads in several worker processes (--jobs) starved one another: a
#: 16-job batch on 2 cores ran 1.2x faster than serial instead of 1.9x.
BLAS_THREAD_VARIABLES = ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS")


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the console script; returns the exit code."""
    for name in BLAS_THREAD_VARIABLES:  # before numpy is first imported
        os.environ.setdefault(name, "1")
    try:
        return run(argv)
    except TauscanError as exc:
        if isinstance(exc, SelectionError):
            exc = exc.for_command_line()
        print(exc.render(), file=sys.stderr)
        return EXIT_ERROR
    except KeyboardInterrupt:
        print("tauscan: interrupted", file=sys.stderr)
        return EXIT_ERROR
    except BrokenPipeError:
        return EXIT_OK
    except Exception as exc:  # a bug: say so in one line, keep the traceback for developers
        if os.environ.get("TAUSCAN_DEBUG"):
            raise
        print(f"tauscan: internal error: {type(exc).__name__}: {exc} (set TAUSCAN_DEBUG=1 for the traceback, and please report it)", file=sys.stderr)
        return EXIT_ERROR
