"""A rich console that records into text (for files, tests and pipes) or prints to a terminal."""

from __future__ import annotations

from rich.console import Console


class _Null:
    def write(self, _text: str) -> int:
        return 0

    def flush(self) -> None:
        pass


def text_console(width: int = 120) -> Console:
    """A console whose output is collected with ``export_text()`` (no colour codes)."""
    return Console(width=width, record=True, file=_Null(), color_system=None, highlight=False)
