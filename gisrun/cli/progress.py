"""A rich progress display on stderr for the long steps of ``gisrun run``."""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager

from rich.console import Console
from rich.progress import (
    BarColumn,
    MofNCompleteColumn,
    Progress,
    SpinnerColumn,
    TaskID,
    TextColumn,
)

__all__ = ["progress_display", "Display"]


class Display:
    """Receives step texts from the pipeline and (task, done, total) from the extras."""

    def __init__(self, progress: Progress | None) -> None:
        self._progress = progress
        self._step: TaskID | None = None
        self._tasks: dict[str, TaskID] = {}

    def step(self, text: str) -> None:
        """Show that a pipeline step started (a spinner line)."""
        if self._progress is None:
            return
        if self._step is not None:
            self._progress.update(self._step, total=1, completed=1)
        self._step = self._progress.add_task(text, total=None)

    def advance(self, task: str, done: int, total: int) -> None:
        """Move a counted step (cell raster bands, maps) on."""
        if self._progress is None:
            return
        if self._step is not None:
            self._progress.update(self._step, total=1, completed=1)
            self._step = None
        if task not in self._tasks:
            self._tasks[task] = self._progress.add_task(task, total=max(total, 1))
        self._progress.update(self._tasks[task], total=max(total, 1), completed=done)

    def finish(self) -> None:
        """Mark the open spinner done."""
        if self._progress is not None and self._step is not None:
            self._progress.update(self._step, total=1, completed=1)


@contextmanager
def progress_display(*, enabled: bool) -> Iterator[Display]:
    """Yield a :class:`Display`; draws on stderr only when ``enabled``."""
    if not enabled:
        yield Display(None)
        return
    columns = (SpinnerColumn(), TextColumn("{task.description}"), BarColumn(),
               MofNCompleteColumn())
    with Progress(*columns, console=Console(stderr=True), transient=False) as progress:
        display = Display(progress)
        yield display
        display.finish()
