"""Progress display for the command line (rich), silent when not on a terminal."""
from __future__ import annotations

import sys
import time


class Steps:
    """Named steps shown with a spinner and elapsed time; also a Monte Carlo bar.

    Used as a context manager. ``start(name)`` begins a step; ``bar(total, name)`` returns
    a callable advancing a progress bar. With ``quiet`` or no terminal nothing is shown.
    """

    def __init__(self, quiet: bool = False):
        self.quiet = quiet or not sys.stderr.isatty()
        self._progress = None
        self._task = None
        self.timings: dict[str, float] = {}
        self._current: str | None = None
        self._t0 = 0.0

    def __enter__(self):
        if not self.quiet:
            from rich.progress import (BarColumn, Progress, SpinnerColumn, TextColumn,
                                       TimeElapsedColumn)

            self._progress = Progress(SpinnerColumn(), TextColumn("{task.description}"),
                                      BarColumn(), TimeElapsedColumn(), transient=True)
            self._progress.__enter__()
        return self

    def __exit__(self, *exc):
        self._close_step()
        if self._progress is not None:
            self._progress.__exit__(*exc)
        return False

    def _close_step(self):
        if self._current is not None:
            self.timings[self._current] = time.perf_counter() - self._t0
            self._current = None

    def start(self, name: str) -> None:
        self._close_step()
        self._current, self._t0 = name, time.perf_counter()
        if self._progress is not None:
            if self._task is not None:
                self._progress.remove_task(self._task)
            self._task = self._progress.add_task(name, total=None)

    def bar(self, total: int, name: str):
        """Return ``advance(n)`` for a bar of ``total`` units."""
        self.start(name)
        if self._progress is None:
            return lambda n=1: None
        self._progress.update(self._task, total=total, completed=0)
        return lambda n=1: self._progress.advance(self._task, n)


    def describe(self, text: str) -> None:
        """Change the current step's text (e.g. a count: ``2 of 3 scenarios done``)."""
        if self._progress is not None and self._task is not None:
            self._progress.update(self._task, description=text)


class Silent(Steps):
    """No display at all (Python API default)."""

    def __init__(self):
        super().__init__(quiet=True)
