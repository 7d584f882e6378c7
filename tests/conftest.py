"""Shared helpers: an independent page-by-page search replay and brute force over all layouts."""

from __future__ import annotations

import bisect
from functools import cache
from itertools import combinations

import numpy as np

from advisor.histogram import Histogram
from advisor.layout import Layout


def path_finder(layout: Layout):
    """A function giving the pages a search for a value reads, root first, by walking the page
    key lists and child slots (independent of advisor's own path helpers). A value is a key rank,
    or g - 0.5 for gap g (strictly between ranks g-1 and g)."""
    children = {(int(layout.parent[p]), int(layout.slot[p])): p for p in range(1, layout.pages)}
    keys = [list(layout.keys_of(p)) for p in range(layout.pages)]

    def path(value: float) -> list[int]:
        page, pages = 0, []
        while True:
            pages.append(page)
            ks = keys[page]
            pos = bisect.bisect_left(ks, value)
            if pos < len(ks) and ks[pos] == value:
                return pages
            nxt = children.get((page, pos))
            if nxt is None:
                return pages
            page = nxt

    return path


def replay_cost(layout: Layout, hist: Histogram) -> float:
    """Walk every key and gap down the tree the way a search would, counting pages read: the
    search stops at the page holding the value or at an empty child slot. Shares nothing with
    advisor.layout.evaluate but the arrays."""
    if hist.n == 0:
        return 0.0
    path = path_finder(layout)
    total = sum(hist.p[k] * len(path(k)) for k in range(hist.n))
    total += sum(hist.q[g] * len(path(g - 0.5)) for g in range(hist.n + 1))
    return total / hist.total if hist.total > 0 else 0.0


def brute_force_optimum(p, q, c, root_size=None) -> float:
    """Minimum cost over EVERY B-tree of capacity c: each range tries every key subset of size
    1..c as its root page (no full-page lemma, no forest recurrence). Returns cost / total.
    With ``root_size``, only trees whose root page holds exactly that many keys."""
    p = tuple(float(x) for x in p)
    q = tuple(float(x) for x in q)
    n = len(p)

    def weight(lo, hi):  # keys lo..hi-1 and gaps lo..hi
        return sum(p[lo:hi]) + sum(q[lo : hi + 1])

    @cache
    def best(lo, hi):
        if hi == lo:
            return 0.0
        w = weight(lo, hi)
        top = float("inf")
        keys = range(lo, hi)
        sizes = [root_size] if (root_size and (lo, hi) == (0, n)) else range(1, min(c, hi - lo) + 1)
        for size in sizes:
            for roots in combinations(keys, size):
                edges = (lo - 1,) + roots + (hi,)
                sub = sum(best(a + 1, b) for a, b in zip(edges[:-1], edges[1:], strict=False))
                top = min(top, sub)
        return w + top

    total = sum(p) + sum(q)
    return best(0, n) / total if total > 0 else 0.0


def random_hist(rng: np.random.Generator, n: int, zero_share: float = 0.3, miss_scale: float = 0.3) -> Histogram:
    p = rng.integers(0, 100, n).astype(float)
    p[rng.random(n) < zero_share] = 0
    q = np.round(rng.integers(0, 100, n + 1) * miss_scale)
    if p.sum() + q.sum() == 0:
        p[0] = 1
    return Histogram(p, q)


def brute_force_bplus(w, L, F) -> float:
    """Minimum of sum_k w_k * depth(leaf(k)) over EVERY variable-depth B+-tree: a range is a leaf
    (if it has at most L keys) or an internal page splitting it into 2..F non-empty runs."""
    w = tuple(float(x) for x in w)
    n = len(w)

    @cache
    def best(lo, hi):
        lam = sum(w[lo:hi])
        options = [lam] if hi - lo <= L else []

        @cache
        def parts(a, k):  # cheapest split of a..hi-1 into exactly k runs
            if k == 1:
                return best(a, hi)
            return min((best(a, r) + parts(r, k - 1) for r in range(a + 1, hi - k + 2)), default=float("inf"))

        for k in range(2, min(F, hi - lo) + 1):
            options.append(lam + parts(lo, k))
        return min(options)

    return best(0, n)
