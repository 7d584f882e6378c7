"""The one way this project writes a file: to a temporary name beside it, renamed when complete."""

from __future__ import annotations

import os
from contextlib import contextmanager
from pathlib import Path

from .interrupt import checkpoint, committed, deferred


@contextmanager
def atomic_path(path: str | os.PathLike, output: bool = True):
    """Yield a temporary path to write; on success rename it over ``path`` (Ctrl-C cannot cut the
    rename in half), on any failure or interrupt remove it. Callers check overwriting first.
    ``output=False`` for a cache file the user did not ask for (not reported after an interrupt)."""
    path = Path(path)
    tmp = path.with_name(f".{path.name}.{os.getpid()}.partial")
    try:
        yield tmp
        checkpoint("export")
        with deferred():
            os.replace(tmp, path)
            if output:
                committed(path)
    finally:
        for leftover in (tmp, tmp.with_name(tmp.name + ".wal")):
            if leftover.exists():
                leftover.unlink()
