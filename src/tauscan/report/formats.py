"""The output formats of ``scan`` and ``check``, by name: one registry that gives the
``--format`` choices and renders, each format's module imported only when it is asked for
(so that ``--help`` stays fast)."""

from __future__ import annotations

import importlib
from collections.abc import Callable
from dataclasses import dataclass


@dataclass(frozen=True)
class Format:
    """One output format: its module and how its ``render`` is called."""

    name: str
    module: str
    #: render(module, runs, top, exit_code, failures) -> text (failures: the netlists of a
    #: batch that stopped with an error, :class:`tauscan.pipeline.ScanFailure`)
    call: Callable
    #: commands that offer it
    commands: frozenset[str]


def _runs_top(m, runs, top, _code, _failures):
    return m.render(runs, top)


FORMATS: dict[str, Format] = {f.name: f for f in (
    Format("table", "tauscan.report.scan_table", _runs_top, frozenset({"scan"})),
    Format("json", "tauscan.report.scan_json", lambda m, runs, _top, code, failures: m.render(runs, code, failures),
           frozenset({"scan", "check"})),
    Format("csv", "tauscan.report.scan_csv", lambda m, runs, _top, _code, _failures: m.render(runs), frozenset({"scan"})),
    Format("markdown", "tauscan.report.scan_markdown", _runs_top, frozenset({"scan"})),
    Format("sarif", "tauscan.report.sarif", lambda m, runs, _top, _code, failures: m.render(runs, failures),
           frozenset({"scan", "check"})),
    Format("html", "tauscan.report.scan_html", lambda m, runs, top, code, failures: m.render(runs, top, code, failures),
           frozenset({"scan", "check"})),
)}
#: the check table (the gate's own layout) stands in for the scan table under ``check``
CHECK_TABLE = Format("table", "tauscan.report.check_table", lambda m, runs, _top, code, _failures: m.render(runs, code),
                     frozenset({"check"}))


def choices(command: str) -> list[str]:
    """The ``--format`` names a command offers, the table first."""
    names = [name for name, f in FORMATS.items() if command in f.commands]
    return ["table"] + [n for n in names if n != "table"] if command == "check" else names


def render(command: str, name: str, runs: list, top: int | None = None, exit_code: int | None = None,
           failures: list | None = None) -> str:
    """The report of ``runs`` in format ``name``, as ``command`` writes it."""
    fmt = CHECK_TABLE if (command == "check" and name == "table") else FORMATS[name]
    return fmt.call(importlib.import_module(fmt.module), runs, top, exit_code, list(failures or ()))
