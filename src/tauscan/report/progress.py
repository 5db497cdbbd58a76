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
        if self._progress is None:
            yield
            return
        task = self._progress.add_task(name, total=None)
        try:
            yield
        finally:
            self._progress.remove_task(task)
