"""The B+-tree form of the whole-tree re-solve over candidate boundaries
(:mod:`advisor.optimize.restricted` explains the idea).

The budgeted B+ DP of :mod:`advisor.optimize.bplus_constrained` (price per page, height as a
dimension) is solved again with one restriction: pages whose subtrees are taller than ``lower``
levels split their key range only at candidate boundaries; subtrees of at most ``lower`` levels
are exact over all boundaries (tables banded to L_leaf F^(h-1) keys). The candidates are the
range ends of the layout's upper pages' children (so the layout is in the family) and both ends of
the hottest keys (so a hot key can get a small leaf near the root). With every boundary a
candidate it is the exact budgeted B+ DP, and its dual bound and proof hold.
"""

from __future__ import annotations

from collections import deque

import numpy as np

from ..histogram import Histogram
from ..layout import Layout, LayoutBuilder
from .bplus import bplus_weights
from .bplus_restricted_kernel import (
    bp_leaf_level,
    bp_lift_lower,
    bp_lower_level,
    bp_lower_row,
    bp_restricted_level,
    bp_restricted_row,
)
from .constrained import ConstrainedResult
from .near import subtree_ranges
from .restricted import LOWER_OPS, MAX_CANDIDATES, affordable_candidates, bisect_over, upper_level_work


def reach(leaf: int, F: int, h: int) -> int:
    """Most keys a B+ subtree of h levels holds."""
    return leaf * F ** (h - 1)


def lower_levels(n: int, leaf: int, F: int, height: int) -> int:
    lower = 1
    while lower + 1 < height and n * min(n, reach(leaf, F, lower + 1)) * reach(leaf, F, lower) * F <= LOWER_OPS:
        lower += 1
    return lower


def upper_bounds(layout: Layout, n: int, height: int, lower: int) -> np.ndarray | None:
    """Boundaries (0..n) where the layout's pages above its lowest ``lower`` levels split their
    ranges; None when those pages are too many (known before any range is computed: a million keys)."""
    upper = np.nonzero(layout.depths() <= height - lower + 1)[0]  # children of upper pages and the root
    if upper.size > MAX_CANDIDATES:
        return None
    lo, hi = subtree_ranges(layout)
    return np.concatenate([[0, n], lo[upper], hi[upper] + 1]).astype(np.int64)


def with_hottest_bounds(base: np.ndarray, hist: Histogram, hot: int) -> np.ndarray:
    """``base`` and both ends of the ``hot`` hottest keys, sorted, each once."""
    order = hist.score_order[:hot].astype(np.int64)
    return np.unique(np.concatenate([base, order, order + 1]))


def bplus_restricted_work(n: int, leaf: int, F: int, height: int, lower: int, bd: np.ndarray) -> float:
    ops = float(n * leaf)
    for h in range(2, lower + 1):
        ops += n * min(n, reach(leaf, F, h)) * (reach(leaf, F, h - 1) + 1) * F
    for h in range(lower + 1, height + 1):
        ops += F * upper_level_work(bd, bd, reach(leaf, F, h), reach(leaf, F, h - 1), h == height, 1)
    return ops


class _Tables:
    def __init__(self, S, leaf: int, F: int, lam: float, bd: np.ndarray, height: int, lower: int) -> None:
        n = S.size - 1
        self.S, self.leaf, self.F, self.lam, self.bd = S, leaf, F, lam, bd
        self.height, self.lower, self.n = height, lower, n
        self.A = [bp_leaf_level(S, leaf, lam, min(leaf, n))]
        for h in range(2, lower + 1):
            self.A.append(bp_lower_level(S, leaf, F, lam, self.A[-1], min(n, reach(leaf, F, h))))
        self.R = {lower: bp_lift_lower(self.A[-1], bd)}
        every = np.arange(bd.size, dtype=np.int64)
        for h in range(lower + 1, height + 1):
            rows = every if h < height else every[:1]
            cap, cap_prev = min(n, reach(leaf, F, h)), min(n, reach(leaf, F, h - 1))
            self.R[h] = bp_restricted_level(S, leaf, F, lam, bd, self.R[h - 1], cap, cap_prev, rows)
        self.value = float(self.R[height][0, bd.size - 1])

    def _split_lower(self, h: int, i: int, L: int):
        """Children (start, length) of the best <= h-level subtree on i..i+L-1, or None for a leaf."""
        A = self.A
        if L <= self.leaf:
            return None
        while h > 2 and L < A[h - 2].shape[1] and A[h - 1][i, L] == A[h - 2][i, L]:
            h -= 1
        prev = A[h - 2]
        G = np.empty((self.F + 1, A[h - 1].shape[1]))
        bp_lower_row(self.F, prev, i, G)
        s = 2 + int(np.argmin(G[2:, L]))
        cap_prev = prev.shape[1] - 1
        parts = []
        target = G[s, L]
        while s > 1:
            t = np.arange(max(s - 1, L - cap_prev), L)
            v = G[s - 1, t] + prev[i + t, L - t]
            k = int(t[int(np.argmax(v == target))])
            parts.append(("C", h - 1, i + k, L - k))
            s, L, target = s - 1, k, G[s - 1, k]
        parts.append(("C", h - 1, i, L))
        return parts[::-1]

    def _split(self, node):
        kind, h, a, b = node
        if kind == "C":
            return self._split_lower(h, a, b)
        bd, R = self.bd, self.R
        if bd[b] - bd[a] <= self.leaf:
            return None
        while h > self.lower and R[h][a, b] == R[h - 1][a, b]:
            h -= 1
        if h == self.lower:
            return self._split_lower(h, int(bd[a]), int(bd[b] - bd[a]))
        prev = R[h - 1]
        G = np.empty((self.F + 1, bd.size))
        cap, cap_prev = min(self.n, reach(self.leaf, self.F, h)), min(self.n, reach(self.leaf, self.F, h - 1))
        bp_restricted_row(self.F, bd, prev, cap, cap_prev, a, G)
        s = 2 + int(np.argmin(G[2:, b]))
        parts = []
        target = G[s, b]
        while s > 1:
            k = np.arange(a + s - 1, b)
            v = G[s - 1, k] + prev[k, b]
            t = int(k[int(np.argmax(v == target))])
            parts.append(("R", h - 1, t, b))
            s, b, target = s - 1, t, G[s - 1, t]
        parts.append(("R", h - 1, a, b))
        return parts[::-1]

    def _start(self, node) -> tuple[int, int]:
        kind, _h, a, b = node
        return (a, b) if kind == "C" else (int(self.bd[a]), int(self.bd[b] - self.bd[a]))

    def layout(self) -> Layout:
        out = LayoutBuilder(self.n, self.leaf, "bplus", self.F)
        todo = deque([(("R", self.height, 0, self.bd.size - 1), -1, -1)])
        while todo:
            node, parent, slot = todo.popleft()
            parts = self._split(node)
            i, L = self._start(node)
            if parts is None:
                out.add(np.arange(i, i + L), parent, slot, leaf=True)
                continue
            seps = [self._start(p)[0] for p in parts[1:]]
            page = out.add(np.asarray(seps, dtype=np.int64), parent, slot, leaf=False)
            for t, part in enumerate(parts):
                todo.append((part, page, t))
        return out.build()


def bplus_restricted_resolve(
    layout: Layout, hist: Histogram, max_pages: int | None, max_height: int, ops: float
) -> ConstrainedResult | None:
    """The price-bisected optimum over B+-trees whose upper pages split at candidate boundaries,
    within ``max_pages`` and ``max_height``; None when nothing affordable can be re-solved.
    ``proven`` and the dual bound hold only when every boundary was a candidate."""
    n, leaf, F = hist.n, layout.capacity, layout.fanout
    if layout.structure != "bplus" or n <= leaf or max_height < 3 or hist.total <= 0 or F < 2:
        return None
    lower = lower_levels(n, leaf, F, max_height)
    base = upper_bounds(layout, n, max_height, lower)
    bd = affordable_candidates(
        np.arange(n + 1, dtype=np.int64),
        base,
        lambda hot: with_hottest_bounds(base, hist, hot),
        lambda bounds: bplus_restricted_work(n, leaf, F, max_height, lower, bounds),
        ops,
    )
    if bd is None:
        return None
    S = np.concatenate([[0.0], np.cumsum(bplus_weights(hist))])
    return bisect_over(
        bd, n + 1, lambda lam: _Tables(S, leaf, F, lam, bd, max_height, lower), max_pages, max_height, n, hist.total
    )
