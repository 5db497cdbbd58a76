"""How a netlist is read: where includes are searched and which number dialect applies."""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class ReadOptions:
    """Options of the reader (``-I DIR`` and ``--x-mega`` on the command line, ``include-dirs``
    and ``x-mega`` in the settings file).

    Attributes
    ----------
    include_dirs:
        Folders searched, in order, for an ``.include`` or ``.lib`` file that is not found
        beside the file that names it.
    x_mega:
        Read ``x`` after a number as mega (``100x`` is 1e8), as some simulators do; without
        it the letter is dropped with a warning, as every letter that is no scale suffix.
    """

    include_dirs: tuple[str, ...] = ()
    x_mega: bool = False
