"""numba's set-up started beside DuckDB's read: it finishes, and a failure inside it is no error."""

from __future__ import annotations

import numba.core.registry

from advisor import warmup


def test_warmup_finishes():
    thread = warmup.start_warmup()
    thread.join(timeout=60)
    assert not thread.is_alive()


def test_warmup_failure_is_swallowed(monkeypatch):
    class Broken:
        @property
        def target_context(self):
            raise RuntimeError("numba internals changed")

    monkeypatch.setattr(numba.core.registry, "cpu_target", Broken())
    warmup._refresh()  # no exception: the first kernel call does the set-up instead
