"""Progress on stderr for long work: a rich spinner per stage when stderr is a terminal,
silent otherwise."""

from __future__ import annotations

import sys
from contextlib import contextmanager


class StageProgress:
    def __init__(self, enabled: bool | None = None) -> None:
        self.enabled = sys.stderr.isatty() if enabled is None else enabled
        self._progress = None

    def __enter__(self) -> "StageProgress":
        if self.enabled:
            from rich.console import Console
            from rich.progress import Progress, SpinnerColumn, TextColumn, TimeElapsedColumn

            self._progress = Progress(SpinnerColumn(), TextColumn("{task.description}"), TimeElapsedColumn(),
                                      console=Console(stderr=True), transient=True)
            self._progress.start()
        return self

    def __exit__(self, *exc) -> None:
        if self._progress is not None:
            self._progress.stop()

    @contextmanager
    def stage(self, name: str):
        """A stage on the display; yields ``advance(done, total)`` for stages that can
        tell how far they are (reading tells bytes of the file)."""
        if self._progress is None:
            yield _ignore
            return
        progress = self._progress
        task = progress.add_task(name, total=None)

        def advance(done: int, total: int) -> None:
            if total > 0:
                progress.update(task, completed=done, total=total,
                                description=f"{name} ({100 * min(done, total) // total}%)")

        try:
            yield advance
        finally:
            progress.remove_task(task)


def _ignore(_done: int, _total: int) -> None:
    pass
