"""An exact re-solve of a whole budgeted layout with its upper pages drawn from candidate keys.

The near-optimal constructions lose most of what they lose in which keys the top pages take:
the subtree re-solves (:mod:`advisor.optimize.refine`) only reach small subtrees, and the top
page's choice shapes everything under it. Here the whole tree is solved again by the budgeted
DP of :mod:`advisor.optimize.constrained` (price per page, height as a dimension), with one
restriction that makes it affordable: pages whose subtrees are taller than ``lower`` levels hold
candidate keys only. Below that, every subtree of at most ``lower`` levels is exact over all keys
(tables banded to the keys such a subtree can hold). The candidates are the keys of the given
layout's upper pages (so that layout is one of the trees searched) and the hottest keys.

Exact for that family and a price; the price bisection keeps the cheapest price-optimal tree
within the page budget, and the caller keeps it only when it beats the layout it came from. A
large-neighbourhood search in the sense of Shaw ("Using constraint programming and local search
methods to solve vehicle routing problems", CP 1998). Cost: the lower tables take
O(n cap(lower)^2 c) per price, the upper levels O(m band^2 c) over m candidates.
"""

from __future__ import annotations

from collections import deque
from dataclasses import replace

import numpy as np

from ..histogram import Histogram
from ..layout import Layout, LayoutBuilder
from .constrained import BISECTION_STEPS, ConstrainedResult, price_bisection
from .restricted_kernel import leaf_level, lift_lower, lower_level, lower_row, restricted_level, restricted_row
from .within import capacity_of

LOWER_OPS = 1e8  # most work of one lower level's table per price (n cap(h) cap(h-1) c)
MAX_CANDIDATES = 4000  # an (m + 1)^2 float64 table per upper level: 128 MB at most
HOT_CANDIDATES = (200, 400, 800, 1600, 3200)  # hottest keys offered, the most the work allows
RESTRICTED_STEPS = 8  # price steps when only some keys are candidates (no proof is sought)
EVALUATIONS = RESTRICTED_STEPS + 2  # DP runs of one bisection at most, for the work estimate
OPS_PER_SECOND = 6e8  # of restricted_work, this machine kind (5.2-7.4e8 measured, n = 2,000-3,000)


def lower_levels(n: int, c: int, height: int) -> int:
    """Levels tabulated over all keys: as many as ``LOWER_OPS`` affords, at least the leaves,
    fewer than ``height``."""
    lower = 1
    while lower + 1 < height and n * min(n, capacity_of(c, lower + 1)) * capacity_of(c, lower) * c <= LOWER_OPS:
        lower += 1
    return lower


def upper_keys(layout: Layout, height: int, lower: int) -> np.ndarray | None:
    """Keys of the layout's pages above its lowest ``lower`` levels; None when they are more than
    ``MAX_CANDIDATES`` (counted before any array of keys is built: at a million keys this is the
    common case and must cost nothing)."""
    upper = np.nonzero(layout.depths() <= height - lower)[0]
    if int(layout.page_sizes()[upper].sum()) > MAX_CANDIDATES:
        return None
    return np.concatenate([layout.keys_of(int(pg)) for pg in upper]).astype(np.int64)


def with_hottest(base: np.ndarray, hist: Histogram, hot: int) -> np.ndarray:
    """``base`` and the ``hot`` hottest keys, sorted, each once."""
    return np.unique(np.concatenate([base, hist.score_order[:hot].astype(np.int64)]))


class _Tables:
    """The lower and candidate-restricted tables for one price, and the tree they give."""

    def __init__(self, P, Q, c: int, lam: float, cand: np.ndarray, height: int, lower: int) -> None:
        n = P.size - 1
        self.P, self.Q, self.c, self.lam, self.cand, self.height, self.lower = P, Q, c, lam, cand, height, lower
        self.C = [leaf_level(P, Q, c, lam, min(c, n))]
        for h in range(2, lower + 1):
            self.C.append(lower_level(P, Q, c, lam, self.C[-1], min(n, capacity_of(c, h))))
        m = cand.size
        self.lp = np.concatenate([[0], cand + 1]).astype(np.int64)
        self.rp = np.concatenate([cand, [n]]).astype(np.int64)
        self.R = {lower: lift_lower(self.C[-1], self.lp, self.rp)}
        every = np.arange(m + 1, dtype=np.int64)
        for h in range(lower + 1, height + 1):
            rows = every if h < height else every[:1]
            cap, cap_prev = min(n, capacity_of(c, h)), min(n, capacity_of(c, h - 1))
            self.R[h] = restricted_level(P, Q, c, lam, self.lp, self.rp, self.R[h - 1], cap, cap_prev, rows)
        self.value = float(self.R[height][0, m])
        self.n = n

    def _expand_lower(self, h: int, i: int, L: int):
        """(keys, children) of the page at the top of the best <= h-level tree on i..i+L-1."""
        C = self.C
        while h > 1 and L < C[h - 2].shape[1] and C[h - 1][i, L] == C[h - 2][i, L]:
            h -= 1
        if h == 1:
            return list(range(i, i + L)), []
        prev = C[h - 2]
        F = np.empty((self.c + 1, C[h - 1].shape[1]))
        lower_row(self.P, self.Q, self.c, self.lam, prev, i, F)
        s = 1 + int(np.argmin(F[1:, L]))
        cap_prev = prev.shape[1] - 1
        keys, kids = [], []
        target = F[s, L]
        while s > 0:
            lo = max(s - 1, L - 1 - cap_prev)
            x = np.arange(lo, L)
            v = F[s - 1, x] + prev[i + x + 1, L - x - 1]
            t = int(x[int(np.argmax(v == target))])
            keys.append(i + t)
            kids.append(("C", h - 1, i + t + 1, L - t - 1))
            s, L, target = s - 1, t, F[s - 1, t]
        kids.append(("C", h - 1, i, L))
        return keys[::-1], kids[::-1]

    def _expand(self, node):
        kind, h, a, b = node
        if kind == "C":
            return self._expand_lower(h, a, b)
        R = self.R
        while h > self.lower and R[h][a, b] == R[h - 1][a, b]:
            h -= 1
        lp, rp = self.lp, self.rp
        if h == self.lower:
            return self._expand_lower(h, int(lp[a]), int(rp[b] - lp[a]))
        prev = R[h - 1]
        F = np.empty((self.c + 1, lp.size))
        cap, cap_prev = min(self.n, capacity_of(self.c, h)), min(self.n, capacity_of(self.c, h - 1))
        restricted_row(self.P, self.Q, self.c, lp, rp, prev, cap, cap_prev, a, F)
        s = 1 + int(np.argmin(F[1:, b]))
        keys, kids = [], []
        target = F[s, b]
        while s > 0:
            k = np.arange(a + s - 1, b)
            v = F[s - 1, k] + prev[k + 1, b]  # infinite where the last child is too long
            t = int(k[int(np.argmax(v == target))])
            keys.append(int(self.cand[t]))
            kids.append(("R", h - 1, t + 1, b))
            s, b, target = s - 1, t, F[s - 1, t]
        kids.append(("R", h - 1, a, b))
        return keys[::-1], kids[::-1]

    def layout(self) -> Layout:
        n, c = self.n, self.c
        out = LayoutBuilder(n, c)
        todo = deque([(("R", self.height, 0, self.cand.size), -1, -1)])
        while todo:
            node, parent, slot = todo.popleft()
            keys, kids = self._expand(node)
            if not keys:
                continue
            page = out.add(np.asarray(keys, dtype=np.int64), parent, slot)
            for t, kid in enumerate(kids):
                todo.append((kid, page, t))
        return out.build()


def restricted_work(n: int, c: int, height: int, lower: int, cand: np.ndarray) -> float:
    """Element operations of one price's tables, counted from where the candidates sit (the
    kernels' loops: per interval start, the ends within reach times the roots that leave the
    last child within reach one level down)."""
    ops = float(n * c)
    for h in range(2, lower + 1):
        ops += n * min(n, capacity_of(c, h)) * (capacity_of(c, h - 1) + 1) * c
    lp = np.concatenate([[0], cand + 1])
    rp = np.concatenate([cand, [n]])
    for h in range(lower + 1, height + 1):
        ops += c * upper_level_work(lp, rp, capacity_of(c, h), capacity_of(c, h - 1), h == height, 0)
    return ops


def upper_level_work(lp: np.ndarray, rp: np.ndarray, reach_h: int, reach_prev: int, top: bool, first: int) -> float:
    """Inner-loop steps of one candidate-indexed level (both tree families): per interval start
    a, the ends b within ``reach_h`` keys times the roots k that leave the last child within
    ``reach_prev`` keys (lp[k + 1] >= rp[b] - reach_prev); ``top``: the root's row only;
    ``first``: the first end counted is a + first."""
    inner = np.arange(rp.size) - np.searchsorted(lp, rp - reach_prev, side="left") + 1
    acc = np.concatenate([[0.0], np.cumsum(inner, dtype=np.float64)])
    rows = lp[:1] if top else lp
    b_hi = np.searchsorted(rp, rows + reach_h, side="right")  # ends within reach, exclusive
    return float((acc[b_hi] - acc[np.arange(rows.size) + first]).sum())


def affordable_candidates(every: np.ndarray, base: np.ndarray | None, offer, work, ops: float) -> np.ndarray | None:
    """``every`` candidate when the work affords it (the re-solve is then the exact budgeted DP),
    else ``offer(hot)`` (``base`` and the hottest ones) for the most hottest the work affords;
    None when not even the smallest offer fits. ``work(cand)`` is one price's tables."""
    if every.size <= MAX_CANDIDATES and work(every) * (BISECTION_STEPS + 2) <= ops:
        return every
    if base is None:
        return None
    best = None
    for hot in HOT_CANDIDATES:
        cand = offer(hot)
        if cand.size > MAX_CANDIDATES or work(cand) * EVALUATIONS > ops:
            break
        best = cand
    return best


def bisect_over(cand: np.ndarray, every_size: int, tables, max_pages, max_height: int, n: int, total: float):
    """The price bisection over one candidate set (``tables(lam)`` gives an object with
    ``value`` and ``layout()``); None when no tree of the family fits the height. The dual bound
    and ``proven`` are kept only when every candidate was offered."""
    first = tables(0.0)
    if not np.isfinite(first.value):
        return None

    def levels(lam: float):
        t = first if lam == 0.0 else tables(lam)
        return t.layout(), t.value

    complete = cand.size == every_size
    res = price_bisection(levels, max_pages, max_height, n, total, BISECTION_STEPS if complete else RESTRICTED_STEPS)
    return res if complete else replace(res, dual_bound=0.0, proven=False)


def restricted_resolve(
    layout: Layout, hist: Histogram, max_pages: int | None, max_height: int, ops: float
) -> ConstrainedResult | None:
    """The price-bisected optimum over trees whose upper pages hold candidate keys (module
    docstring) within ``max_pages`` and ``max_height``, or None when nothing affordable can be
    re-solved. Its dual bound and ``proven`` hold for every tree only when every key was a
    candidate (``proven`` is False otherwise); the caller compares its cost with the layout's."""
    n, c = hist.n, layout.capacity
    if layout.structure != "btree" or n <= c or max_height < 2 or hist.total <= 0:
        return None
    lower = lower_levels(n, c, max_height)
    base = upper_keys(layout, max_height, lower)
    cand = affordable_candidates(
        np.arange(n, dtype=np.int64),
        base,
        lambda hot: with_hottest(base, hist, hot),
        lambda keys: restricted_work(n, c, max_height, lower, keys),
        ops,
    )
    if cand is None:
        return None
    P = np.concatenate([[0.0], np.cumsum(hist.p)])
    Q = np.concatenate([[0.0], np.cumsum(hist.q)])
    return bisect_over(
        cand, n, lambda lam: _Tables(P, Q, c, lam, cand, max_height, lower), max_pages, max_height, n, hist.total
    )
