"""Netlist reader: SPICE-format text -> a flat, fully evaluated circuit.

Stages: :mod:`lines` (pre-pass), :mod:`fields` (the Lark card grammar),
:mod:`loader` (includes, definitions), :mod:`flatten` (hierarchy and
parameters), with :mod:`expr` evaluating parameter expressions.
"""

from __future__ import annotations

from tauscan.circuit import Circuit
from tauscan.gcpause import paused_gc
from tauscan.reader.flatten import flatten
from tauscan.reader.loader import load
from tauscan.reader.options import ReadOptions


def read_netlist(path: str, params: dict[str, float] | None = None, progress=None,
                 lib_section: str | None = None, unknown_params: str = "error",
                 options: ReadOptions | None = None) -> Circuit:
    """Read ``path`` (and its includes) into a flat circuit.

    ``params`` overrides global ``.param`` values (as ``--param`` does); ``progress(done,
    total)`` hears how many bytes of the file have been read; ``lib_section`` (a corner's)
    replaces the section of every ``.lib FILE SECTION`` card whose file has one of that name.  The file is read a chunk at
    a time: its text is never held whole.  An override that names no global ``.param`` is an
    error, or with ``unknown_params="record"`` kept in ``Circuit.unknown_params`` with a warning.
    ``options``: the include search path and the number dialect (:class:`ReadOptions`).
    """
    with paused_gc():  # millions of small tuples and no reference cycles
        return flatten(load(path, progress, lib_section, options), params, unknown_params, options)


__all__ = ["ReadOptions", "read_netlist"]
