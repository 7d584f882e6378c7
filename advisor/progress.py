"""Progress on stderr: a Rich bar in a terminal, else one plain line for each step that took a
second or more (so a piped or logged run still shows where its time goes). Never on stdout."""

from __future__ import annotations

import os
import sys
import time
from contextlib import contextmanager
from pathlib import Path

from rich.console import Console
from rich.progress import BarColumn, Progress, SpinnerColumn, TextColumn, TimeElapsedColumn

SLOW_STEP = 1.0  # seconds: plain-line mode reports steps at least this long


def kernels_compiled() -> bool:
    """Whether numba's on-disk cache holds the largest kernel (the budgeted construction): without
    it, the first run on a machine spends 20-40 s compiling before its first figure."""
    if os.environ.get("NUMBA_CACHE_DIR"):  # numba then keeps its cache there only
        roots = [Path(os.environ["NUMBA_CACHE_DIR"])]
    else:
        roots = [Path(__file__).parent / "optimize" / "__pycache__"]
    return any(next(root.rglob("within_build.build_within-*.nbi"), None) for root in roots if root.is_dir())


def first_run_note() -> None:
    """One line on stderr when the kernels are not compiled yet, so a long first wait is explained."""
    if not kernels_compiled():
        sys.stderr.write("advisor: first run here: compiling the search kernels once (20-40 s); later runs load them\n")
        sys.stderr.flush()


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
    if sys.stderr.isatty():  # a terminal: a piped run's stderr stays one line per slow step
        first_run_note()
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
