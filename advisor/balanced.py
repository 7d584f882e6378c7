"""The balanced B+-tree shape: every leaf at the even split's depth, leaf boundaries chosen so
the hottest keys share few leaves, which a buffer pool of B pages then holds.

Page reads per lookup are the height for every such layout, so the only gain is in page misses
with a cache. Candidates: the even split itself and hot-leaf packings for several numbers of
hot leaves; the pick minimises pinned-cache misses summed over the pool sizes, among candidates
never worse than the even split at any of those sizes (so the curve never rises above it).
Objective: pinned-cache misses summed over the pool sizes (the area under the curve), among
layouts never worse than the even split at any size. Exact (every balanced tree enumerated) for
up to 12 keys and a few thousand trees; near-optimal beyond, with ``balanced_miss_bound``.
"""

from __future__ import annotations

import numpy as np

from .bufferpool import pinned_misses, pool_sizes
from .histogram import Histogram
from .layout import Layout, LayoutBuilder, evaluate
from .optimize.bplus import bplus_weights, hot_leaf_starts, leaves_to_tree
from .optimize.bplus_bounds import bplus_level_bound


def balanced_bplus_layout(
    hist: Histogram, uniform: Layout, pages: list[int] | None = None, max_pages: int | None = None
) -> tuple[Layout, list[int], str]:
    """Best balanced layout for the pool sizes (default: 0.1%..10% of the even split's pages),
    within ``max_pages`` pages (default: the even split's own)."""
    L, n = uniform.capacity, hist.n
    max_pages = uniform.pages if max_pages is None else max_pages
    sizes = pool_sizes(uniform.pages, pages=pages)
    if n <= L or hist.total <= 0:
        return uniform, sizes, "exact: one leaf, or nothing looked up"
    base = pinned_misses(uniform, hist, sizes)
    height = int(uniform.depths().max())
    candidates = _every_balanced(hist, uniform, height) if n <= 12 else None
    exact = candidates is not None
    if not exact:
        candidates = _packings(hist, uniform, height, sizes)
    best, best_score, how = uniform, sum(base), "even split (no packing helped)"
    for name, cand in candidates:
        if cand.pages > max_pages:  # never more pages than the even split (the default budget)
            continue
        misses = pinned_misses(cand, hist, sizes)
        never_worse = all(m <= b + 1e-12 for m, b in zip(misses, base, strict=True))
        if never_worse and sum(misses) < best_score - (1e-12 if exact else 0.0):
            best, best_score, how = cand, sum(misses), name
    if exact and how.startswith("even"):
        how = "exact: the even split is already best"
    return best, sizes, how


def _every_balanced(hist: Histogram, uniform: Layout, height: int) -> list | None:
    """Every balanced tree (exact search), or None when there are too many."""
    every = all_balanced(hist.n, uniform.capacity, uniform.fanout, height)
    if every is None:
        return None
    return [("exact: best of every balanced tree", cand) for cand in every]


def _packings(hist: Histogram, uniform: Layout, height: int, sizes: list[int]) -> list:
    """Near-optimal candidates: full leaves aligned on the hottest run, and the k hottest runs
    packed into leaves of their own, for k around the pool sizes; all at the even split's height."""
    L, F, n = uniform.capacity, uniform.fanout, hist.n
    max_leaves = F ** (height - 1)
    w = bplus_weights(hist)
    cum = np.concatenate([[0.0], np.cumsum(w)])
    hottest = int(np.argmax(cum[L:] - cum[:-L])) if n > L else 0
    offset = hottest % L  # full leaves aligned so the hottest run of L keys is one leaf
    aligned = np.concatenate([[0], np.arange(offset, n, L)]) if offset else np.arange(0, n, L)
    starts = [("full leaves aligned on the hottest run", np.unique(aligned))]
    for k in sorted(set(max(1, s) for s in sizes) | {max(1, sizes[-1] * 2)}):
        starts.append(
            (f"{k} hottest runs of {L} keys packed into their own leaves", hot_leaf_starts(w, L, k, max_leaves))
        )
    out = []
    for name, leaf_starts in starts:
        if leaf_starts is None or leaf_starts.size > max_leaves:
            continue
        cand = leaves_to_tree(n, L, F, leaf_starts, height)
        if int(cand.depths().max()) == height and evaluate(cand, hist).expected_page_reads <= height + 1e-9:
            out.append((name, cand))
    return out


ENUMERATION_LIMIT = 20_000  # balanced trees tried exhaustively below this many


def _compositions(n: int, L: int):
    """Every split of n keys into consecutive runs of 1..L keys (as run lengths)."""
    if n == 0:
        yield ()
        return
    for first in range(1, min(L, n) + 1):
        for rest in _compositions(n - first, L):
            yield (first,) + rest


def _groupings(count: int, F: int, height: int):
    """Every tree of exactly ``height`` levels over ``count`` leaves (2..F children per internal
    page), as nested tuples of leaf-count groups; a leaf is the integer 1."""
    if height == 1:
        if count == 1:
            yield 1
        return
    for parts in _splits(count, F):
        yield from _product([_groupings_list(k, F, height - 1) for k in parts])


def _groupings_list(count: int, F: int, height: int) -> list:
    return list(_groupings(count, F, height))


def _splits(count: int, F: int):
    """Ordered splits of count leaves into 2..F non-empty groups."""

    def rec(left: int, slots: int):
        if slots == 1:
            yield (left,)
            return
        for k in range(1, left - slots + 2):
            for rest in rec(left - k, slots - 1):
                yield (k,) + rest

    for m in range(2, min(F, count) + 1):
        yield from rec(count, m)


def _product(options: list[list]):
    if not options:
        yield ()
        return
    for head in options[0]:
        for tail in _product(options[1:]):
            yield (head,) + tail


def _build(n: int, L: int, F: int, runs: tuple, shape) -> Layout:
    starts = np.concatenate([[0], np.cumsum(runs)[:-1]]).astype(np.int64)
    b = LayoutBuilder(n, L, "bplus", F)
    leaf_iter = iter(range(len(runs)))

    def add(node, parent: int, slot: int) -> int:
        if isinstance(node, int):
            t = next(leaf_iter)
            b.add(np.arange(starts[t], starts[t] + runs[t]), parent, slot, leaf=True)
            return int(starts[t])
        page = b.add(np.zeros(0, dtype=np.int64), parent, slot, leaf=False)
        firsts = [add(child, page, k) for k, child in enumerate(node)]
        b.set_keys(page, np.asarray(firsts[1:], dtype=np.int64))
        return firsts[0]

    add(shape, -1, -1)
    return b.build()


def all_balanced(n: int, L: int, F: int, height: int, limit: int = ENUMERATION_LIMIT):
    """Every B+-tree over n keys with all leaves at depth ``height``; None if more than ``limit``."""
    out = []
    for runs in _compositions(n, L):
        for shape in _groupings(len(runs), F, height):
            out.append(_build(n, L, F, runs, shape))
            if len(out) > limit:
                return None
    return out


def balanced_miss_bound(hist: Histogram, L: int, F: int, height: int, pool: int, one_depth: bool = True) -> float:
    """Lower bound on pinned misses per lookup of ANY B+-tree of at most ``height`` levels.

    misses = reads - (traffic of the B cached pages) / total. With ``one_depth`` (every leaf at
    depth ``height``, as in the balanced shape when the even split has one leaf depth) every
    lookup reads exactly ``height`` pages; otherwise (fanout 2 can force mixed leaf depths) the
    reads are bounded below by the level bound of :func:`bplus_level_bound`, valid for any tree.
    A page at depth d covers at most L F^(height-d) keys, so x cached pages at depth d
    carry at most min(total, weight of the x L F^(height-d) heaviest keys), at most F^(d-1)
    pages exist there; those caps are concave in x, so giving the B pages one by one to the
    depth with the largest gain maximises their sum, which bounds any real cache's traffic.
    """
    total = hist.total
    if total <= 0 or hist.n == 0:
        return 0.0
    ws = np.sort(bplus_weights(hist))[::-1]
    cum = np.concatenate([[0.0], np.cumsum(ws)])

    def carried(d: int, x: int) -> float:
        keys = min(ws.size, x * L * F ** (height - d))
        return min(total, float(cum[keys]))

    taken = [0] * (height + 1)
    cached = 0.0
    for _ in range(pool):
        best_d, best_gain = None, 0.0
        for d in range(1, height + 1):
            if taken[d] >= F ** (d - 1):
                continue
            gain = carried(d, taken[d] + 1) - carried(d, taken[d])
            if gain > best_gain:
                best_d, best_gain = d, gain
        if best_d is None:
            break
        taken[best_d] += 1
        cached += best_gain
    reads = float(height) if one_depth else min(float(height), bplus_level_bound(hist, L, F))
    return max(0.0, reads - cached / total)
