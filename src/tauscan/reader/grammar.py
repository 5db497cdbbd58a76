"""Locate and load the Lark grammars in the top-level ``grammar/`` folder.

In a wheel the folder is shipped as ``tauscan/grammar``; in a source checkout
(editable install, or running from ``src/``) it is found beside ``src/``.
"""

from __future__ import annotations

from functools import lru_cache
from importlib import resources
from pathlib import Path

from lark import Lark


def grammar_dir() -> Path:
    """The folder holding ``netlist.lark`` and ``expr.lark``."""
    packaged = resources.files("tauscan") / "grammar"
    if packaged.is_dir() and (packaged / "netlist.lark").is_file():
        return Path(str(packaged))
    checkout = Path(__file__).resolve().parents[3] / "grammar"
    if (checkout / "netlist.lark").is_file():
        return checkout
    raise RuntimeError("tauscan's grammar files are missing from the installation")


def grammar_text(name: str) -> str:
    return (grammar_dir() / name).read_text(encoding="utf-8")


@lru_cache(maxsize=None)
def card_parser() -> Lark:
    """LALR parser for one card (a logical line), with positions kept."""
    return Lark(grammar_text("netlist.lark"), parser="lalr", propagate_positions=False, maybe_placeholders=False)


@lru_cache(maxsize=None)
def expression_parser() -> Lark:
    """LALR parser for a parameter expression."""
    return Lark(grammar_text("expr.lark"), parser="lalr", maybe_placeholders=False)
