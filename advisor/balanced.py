"""The balanced B+-tree shape: every leaf at the even split's depth, leaf boundaries chosen so
the hottest keys share few leaves, which a buffer pool of B pages then holds.

Page reads per lookup are the height for every such layout, so the only gain is in page misses
with a cache. Candidates: the even split itself and hot-leaf packings for several numbers of
hot leaves; the pick minimises pinned-cache misses summed over the pool sizes, among candidates
never worse than the even split at any of those sizes (so the curve never rises above it).
Near-optimal only: no exact solver and no lower bound yet.
"""

from __future__ import annotations

import numpy as np

from .bufferpool import pinned_misses, pool_sizes
from .histogram import Histogram
from .layout import Layout, evaluate
from .optimize.bplus import bplus_weights, hot_leaf_starts, leaves_to_tree


def balanced_bplus_layout(hist: Histogram, uniform: Layout, pages: list[int] | None = None) -> tuple[Layout, list[int], str]:
    """Best balanced layout for the pool sizes (default: 0.1%..10% of the even split's pages)."""
    L, F, n = uniform.capacity, uniform.fanout, hist.n
    sizes = pool_sizes(uniform.pages, pages=pages)
    base = pinned_misses(uniform, hist, sizes)
    best, best_score, how = uniform, sum(base), "even split (no packing helped)"
    if n <= L or hist.total <= 0:
        return best, sizes, how
    height = int(uniform.depths().max())
    max_leaves = F ** (height - 1)
    w = bplus_weights(hist)
    cum = np.concatenate([[0.0], np.cumsum(w)])
    hottest = int(np.argmax(cum[L:] - cum[:-L])) if n > L else 0
    offset = hottest % L  # full leaves aligned so the hottest run of L keys is one leaf
    aligned = np.concatenate([[0], np.arange(offset, n, L)]) if offset else np.arange(0, n, L)
    candidates = [("full leaves aligned on the hottest run", np.unique(aligned))]
    for k in sorted(set(max(1, s) for s in sizes) | {max(1, sizes[-1] * 2)}):
        candidates.append((f"{k} hottest runs of {L} keys packed into their own leaves", hot_leaf_starts(w, L, k, max_leaves)))
    for name, starts in candidates:
        if starts is None or starts.size > max_leaves:
            continue
        cand = leaves_to_tree(n, L, F, starts, height)
        if int(cand.depths().max()) != height or evaluate(cand, hist).expected_page_reads > height + 1e-9:
            continue
        misses = pinned_misses(cand, hist, sizes)
        if all(m <= b + 1e-12 for m, b in zip(misses, base)) and sum(misses) < best_score:
            best, best_score, how = cand, sum(misses), name
    return best, sizes, how
