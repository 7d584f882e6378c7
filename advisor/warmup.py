"""numba's one-time set-up, started on a thread while DuckDB reads the log.

The first compiled kernel a process calls, even one loaded from the cache, makes numba load
its typing and lowering registries: about 0.3 s of Python work on this machine kind, paid
before any planning. DuckDB releases the GIL while it aggregates, so the CLI starts that
set-up beside the read and the two overlap. Warming is only ever an optimisation: if numba's
internals differ from what is used here, nothing is warmed and the first kernel pays as before.
"""

from __future__ import annotations

import threading


def _refresh() -> None:
    try:
        from numba.core.compiler_lock import global_compiler_lock
        from numba.core.registry import cpu_target

        with global_compiler_lock:  # the lock every compile and cache load takes
            cpu_target.target_context.refresh()
    except Exception:  # noqa: BLE001 - an optimisation only; the first kernel call does it instead
        pass


def start_warmup() -> threading.Thread:
    """Start the set-up on a daemon thread; a kernel called meanwhile waits on numba's own lock."""
    thread = threading.Thread(target=_refresh, name="advisor-numba-warmup", daemon=True)
    thread.start()
    return thread


__all__ = ["start_warmup"]
