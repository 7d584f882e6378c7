"""Ctrl-C answered the same way in every phase: exit 130, one line, no partial file.

The handler is installed by :mod:`advisor.entry` before any heavy import. Outside an armed
section (start-up, imports) nothing has been written, so it prints the line and leaves at once.
Inside one (the CLI's guarded run) it raises ``KeyboardInterrupt`` so that every writer's
``finally`` removes its temporary file. While a finished file is renamed into place
(:func:`deferred`) the signal is only recorded, and acted on right after. Standard library only.
"""

from __future__ import annotations

import os
import signal
import sys
import time
from contextlib import contextmanager

MESSAGE = "advisor: error: interrupted; no output file was left behind"
_state = {"armed": False, "deferred": 0, "hit": False}
_written: list[str] = []


def _on_sigint(_signum, _frame) -> None:
    _state["hit"] = True
    if _state["deferred"]:
        return
    if _state["armed"]:
        raise KeyboardInterrupt
    sys.stderr.write(message() + "\n")
    sys.stderr.flush()
    os._exit(130)


def install() -> None:
    """Take over SIGINT (main thread only; a no-op elsewhere, e.g. inside a test runner's thread)."""
    try:
        signal.signal(signal.SIGINT, _on_sigint)
    except ValueError:
        pass


def committed(path) -> None:
    """Record a finished output file, so an interrupt after it says so instead of denying it."""
    _written.append(str(path))


def message() -> str:
    """The one line for an interrupt, honest about files already complete."""
    if _written:
        return f"advisor: error: interrupted after writing {', '.join(_written)} (complete); nothing else was written"
    return MESSAGE


def interrupted() -> bool:
    """True once a SIGINT arrived (also one some library swallowed)."""
    return _state["hit"]


@contextmanager
def armed():
    """While inside, SIGINT raises KeyboardInterrupt (so cleanup runs) instead of leaving at once."""
    before = _state["armed"]
    _state["armed"] = True
    try:
        yield
    finally:
        _state["armed"] = before


@contextmanager
def deferred():
    """A short step that must not be cut in half (a rename); a SIGINT inside it is raised after."""
    _state["deferred"] += 1
    try:
        yield
    finally:
        _state["deferred"] -= 1
    if _state["hit"] and not _state["deferred"] and _state["armed"]:
        raise KeyboardInterrupt


def checkpoint(phase: str) -> None:
    """Test hook: with ADVISOR_PAUSE_AT=phase, say so on stderr and wait there (up to 20 s), so a
    test can send SIGINT in a known phase. Does nothing otherwise."""
    if os.environ.get("ADVISOR_PAUSE_AT") != phase:
        return
    sys.stderr.write(f"advisor: paused at {phase}\n")
    sys.stderr.flush()
    end = time.monotonic() + 20
    while time.monotonic() < end:
        time.sleep(0.01)
