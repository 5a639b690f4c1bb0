"""Progress of a long command on a terminal: named steps and counted work.

:class:`Steps` shows, on standard error and only when it is a terminal, one
line per running step: its name, a bar and an ETA when the amount of work
is known (stages analysed, cells checked), a spinner otherwise (reading and
flattening, extraction).  Off a terminal it does nothing, so redirected
output and JSON on standard output are never touched.

Examples
--------
Off a terminal every call is a no-op:

>>> import io
>>> with Steps(stream=io.StringIO()) as steps:
...     with steps.step("extracting"):
...         pass
...     tick = steps.counted("analysing stages", 3)
...     for _ in range(3):
...         tick()
>>> steps.enabled
False

Notes
-----
The display is ``rich.progress.Progress`` (transient: it disappears when the
command ends).  Cost: one display update per :meth:`Steps.counted` tick,
which rich throttles to its refresh rate.
"""

from __future__ import annotations

import sys
from contextlib import contextmanager

__all__ = ["Steps"]


class Steps:
    """Progress display of one command (see the module text).

    Parameters
    ----------
    stream : file or None
        Where to draw; standard error by default.  Drawn only when it is a
        terminal.
    """

    def __init__(self, stream=None):
        self._stream = sys.stderr if stream is None else stream
        self._bar = None
        isatty = getattr(self._stream, "isatty", None)
        self.enabled = bool(isatty and isatty())

    def __enter__(self) -> "Steps":
        if self.enabled:
            from rich.console import Console
            from rich.progress import (BarColumn, MofNCompleteColumn, Progress, SpinnerColumn, TextColumn,
                                       TimeElapsedColumn, TimeRemainingColumn)

            self._bar = Progress(SpinnerColumn(), TextColumn("{task.description}"), BarColumn(),
                                 MofNCompleteColumn(), TimeElapsedColumn(), TimeRemainingColumn(),
                                 console=Console(file=self._stream), transient=True)
            self._bar.__enter__()
        return self

    def __exit__(self, *exc) -> None:
        if self._bar is not None:
            self._bar.__exit__(*exc)
            self._bar = None

    @contextmanager
    def step(self, name: str):
        """A step of unknown length, shown while the block runs."""
        if self._bar is None:
            yield
            return
        task = self._bar.add_task(name, total=None)
        try:
            yield
        finally:
            self._bar.remove_task(task)

    def counted(self, name: str, total: int):
        """A step of ``total`` units; returns the function to call per unit
        done (the line goes when the last unit is done)."""
        if self._bar is None:
            return lambda *_: None
        bar = self._bar
        task = bar.add_task(name, total=total)
        done = [0]

        def tick(*_):
            done[0] += 1
            bar.advance(task)
            if done[0] >= total:
                bar.remove_task(task)

        return tick
