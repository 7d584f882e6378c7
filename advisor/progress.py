"""Progress on stderr: a Rich bar in a terminal, else one plain line for each step that took a
second or more (so a piped or logged run still shows where its time goes). Never on stdout."""

from __future__ import annotations

import sys
import time
from contextlib import contextmanager

from rich.console import Console
from rich.progress import BarColumn, Progress, SpinnerColumn, TextColumn, TimeElapsedColumn

SLOW_STEP = 1.0  # seconds: plain-line mode reports steps at least this long


class Steps:
    """``step(text)`` marks the start of a step (and the end of the one before)."""

    def __init__(self, bar: Progress | None) -> None:
        self.bar = bar
        self.task = bar.add_task("starting") if bar is not None else None
        self.current: str | None = None
        self.since = time.perf_counter()

    def step(self, text: str) -> None:
        self._close()
        self.current, self.since = text, time.perf_counter()
        if self.bar is not None:
            self.bar.update(self.task, description=text)

    def _close(self) -> None:
        took = time.perf_counter() - self.since
        if self.bar is None and self.current is not None and took >= SLOW_STEP:
            sys.stderr.write(f"advisor: {self.current}: {took:.1f} s\n")
            sys.stderr.flush()

    def done(self) -> None:
        self._close()
        self.current = None


@contextmanager
def steps(quiet: bool = False):
    """A :class:`Steps` reporter for one command (``quiet``: nothing at all)."""
    if quiet:
        s = Steps(None)
        s.current = None
        s._close = lambda: None  # type: ignore[method-assign]
        yield s
        return
    if sys.stderr.isatty():
        bar = Progress(
            SpinnerColumn(),
            TextColumn("{task.description}"),
            BarColumn(),
            TimeElapsedColumn(),
            console=Console(stderr=True),
            transient=True,
        )
        with bar:
            yield Steps(bar)
        return
    s = Steps(None)
    try:
        yield s
    finally:
        s.done()
