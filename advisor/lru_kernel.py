"""Compiled LRU replay: misses of a B-page LRU pool over a page-access sequence.

The plain version (an ``OrderedDict`` per pool size, :func:`advisor.bufferpool.lru_plain`) costs
about a microsecond per access in CPython; this keeps the pool as a doubly linked list over page
ids in arrays (O(1) per access, no allocation) and runs compiled. ``tests/test_bufferpool.py``
checks both against ``cachetools.LRUCache``; ``benchmarks/bench_kernels.py`` measures them.
"""

from __future__ import annotations

import numpy as np
from numba import njit


@njit(cache=True)
def lru_miss_count(stop: np.ndarray, paths: np.ndarray, capacity: int) -> int:
    """Misses of an LRU pool of ``capacity`` pages, cold start, over the lookups whose last page
    is ``stop[i]``: each reads the root-to-page path ``paths[stop[i]]`` (-1 padded), root first.
    The per-lookup page sequence is never materialised (memory: the stop pages only)."""
    pages = paths.shape[0]
    head = pages  # sentinel: head.next = most recent, head.prev = least recent
    nxt = np.full(pages + 1, -1, dtype=np.int64)
    prv = np.full(pages + 1, -1, dtype=np.int64)
    inside = np.zeros(pages, dtype=np.bool_)
    nxt[head] = head
    prv[head] = head
    size = 0
    misses = 0
    for i in range(stop.shape[0]):
        row = paths[stop[i]]
        for j in range(row.shape[0]):
            p = row[j]
            if p < 0:
                break
            if capacity <= 0:
                misses += 1
                continue
            if inside[p]:  # unlink p
                nxt[prv[p]] = nxt[p]
                prv[nxt[p]] = prv[p]
            else:
                misses += 1
                if size == capacity:  # evict the least recent
                    old = prv[head]
                    nxt[prv[old]] = head
                    prv[head] = prv[old]
                    inside[old] = False
                else:
                    size += 1
                inside[p] = True
            first = nxt[head]  # link p at the front
            nxt[p] = first
            prv[p] = head
            prv[first] = p
            nxt[head] = p
    return misses
