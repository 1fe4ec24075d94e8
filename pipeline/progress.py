"""Progress bars for long runs: a callable the learner reports to, drawn with rich.

The learner calls ``progress(label, done, total)`` (for instance once per batch of a
level of the skeleton search); `Progress` draws one bar per label on a terminal and
stays silent when standard output is not a terminal (a log file, a pipe, a notebook
cell that captures output). Bars appear only once the work has lasted `DELAY` seconds:
a rerun from the store that ends sooner draws nothing, and does not import rich.
"""

from __future__ import annotations

import sys
import time
from typing import TextIO

__all__ = ["Progress", "DELAY"]

#: Seconds of work before the bars appear (shorter work shows none).
DELAY = 0.5
_clock = time.monotonic


class Progress:
    """A context manager and callable ``(label, done, total)`` drawing rich progress bars.

    Parameters
    ----------
    enabled : bool or None
        Draw bars; None (default) draws them only when `stream` is a terminal.
    stream : text stream or None
        Where to draw (default: standard output).
    """

    def __init__(self, enabled: bool | None = None, stream: TextIO | None = None) -> None:
        stream = sys.stdout if stream is None else stream
        if enabled is None:
            enabled = bool(getattr(stream, "isatty", lambda: False)())
        self.enabled = enabled
        self._stream = stream
        self._bars = None
        self._tasks: dict[str, int] = {}
        self._since: float | None = None
        self._waiting: dict[str, tuple[int, int]] = {}  # the last report of each label

    def __enter__(self) -> Progress:
        self._since = _clock()
        return self

    def _start(self) -> None:
        """Draw the bars from now on, with every label reported so far."""
        from rich.console import Console
        from rich.progress import BarColumn, MofNCompleteColumn, TextColumn, TimeElapsedColumn
        from rich.progress import Progress as _Bars

        self._bars = _Bars(TextColumn("{task.description:<28}"), BarColumn(),
                           MofNCompleteColumn(), TimeElapsedColumn(),
                           console=Console(file=self._stream), transient=True)
        self._bars.start()
        waiting, self._waiting = self._waiting, {}
        for label, (done, total) in waiting.items():
            self(label, done, total)

    def __exit__(self, *exc: object) -> None:
        if self._bars is not None:
            self._bars.stop()
            self._bars = None
        self._since = None
        self._waiting.clear()

    def __call__(self, label: str, done: int, total: int) -> None:
        """Report that `done` of `total` steps of `label` are finished."""
        if self._bars is None:
            if not self.enabled or self._since is None:
                return
            if _clock() - self._since < DELAY:
                self._waiting[label] = (done, total)
                return
            self._start()
        task = self._tasks.get(label)
        if task is None:
            task = self._bars.add_task(str(label), total=max(int(total), 0))
            self._tasks[label] = task
        self._bars.update(task, completed=int(done), total=max(int(total), 0))
