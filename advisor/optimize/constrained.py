"""Exact optima under a height limit and a page budget (classic B-tree).

Height: C_h(i, j), the cheapest tree of at most h levels on keys i+1..j, is a dimension of the
recurrence, as for height-restricted optimal binary search trees (Garey, "Optimal binary search
trees with restricted maximal depth", SIAM J. Computing 3, 1974):

    C_1(i, j) = W(i, j) + lam            if 1 <= j - i <= c, else infinite
    C_h(i, j) = W(i, j) + lam            if 1 <= j - i <= c
              = W(i, j) + lam + G_{h-1}(i, j, c)   otherwise,

where G_{h-1}(i, j, s) is the cheapest forest of s root keys over subtrees of at most h - 1
levels (built from C_{h-1} along the same addition chain as :mod:`advisor.optimize.exact`).

Pages: ``lam`` is a price per page (Lagrangian relaxation). The full-page lemma still holds
with a height limit and lam >= 0: pulling a child's extreme key up into a non-full parent moves
nothing deeper and never adds a page (checked against brute force in the tests). For each lam
the DP gives the exact minimum of cost + lam x pages over trees of at most h levels, so:

* a lam-optimal tree with P_lam pages is an exact optimum among trees of at most P_lam pages;
* for any budget P, (min_T cost(T) + lam pages(T)) - lam P is a lower bound on the cost of every
  tree within P pages (weak duality), the best lam giving the strongest bound.

``solve_within`` bisects lam for the cheapest lam-optimal tree within the budget and reports the
dual bound; the plan is proven optimal when that tree meets the bound.

Two exact savings (see :class:`_Levels`): C_{h-1} is infinite beyond cap(h-1) = (c+1)^(h-1) - 1
keys, so the forests of a lower level are tabulated only as far as they can reach; and the top
level is needed for the whole range only (a prefix recurrence on row 0). Measured 9.5-48x faster
than tabulating every level in full, same optima (``benchmarks/bench_budget_exact.py``).
``solve_window_within`` is the same DP with exactly w keys on top, the piece of a budgeted
re-cut (:mod:`advisor.optimize.recut`).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from ..histogram import Histogram
from ..layout import Layout, LayoutBuilder
from .exact import ROW_BLOCK, ForestTables, forest_chain, forest_roots, length_limits, row_min_of_sums
from .topdown import build_top_down
from .uniform import min_height, reach

BISECTION_STEPS = 14
EVALUATIONS = BISECTION_STEPS // 2 + 2  # typical DP runs of one bisection (measured 1-8), for work estimates
WITHIN_OPS_PER_SECOND = 1.2e8  # of constrained_work, this machine kind (0.7-2.4e8 measured, n = 500-2,000)


@dataclass(frozen=True)
class ConstrainedResult:
    layout: Layout
    expected_page_reads: float  # cost / total of the layout returned
    dual_bound: float  # a lower bound on every layout within the budget (per lookup)
    proven: bool  # layout meets the dual bound: an exact constrained optimum
    evaluations: int  # DP runs spent


def forest_reach(split: dict, top: int, sub_keys: int, n: int) -> dict[int, int]:
    """Most keys a forest of s roots spans over subtrees of at most ``sub_keys`` keys, for every
    forest size the chain ``split`` (built for ``top``) uses."""
    sizes = set(split) | {0, top} | {x for ab in split.values() for x in ab}
    return {s: min(n, s + (s + 1) * sub_keys) for s in sizes}


@lru_cache(maxsize=4096)
def constrained_work(n: int, c: int, height: int, top: int | None = None) -> float:
    """Element operations of one DP run at n keys, the same count as the loops of
    :class:`_Levels` (banded lower levels, the prefix-only top); the bisection runs several."""
    split = forest_chain(c)
    longest = length_limits(split, (c,), n)
    ops = float((c if top is None else top) * (n + 1) ** 2 + 4 * (n + 1) ** 2)  # top page, tables
    for h in range(2, height):
        span = forest_reach(split, c, reach(h - 1, c), n)
        for s, (a, b) in split.items():
            L = np.arange(max(s, 1), min(longest[s], span[s]) + 1, dtype=np.float64)
            width = np.minimum(L - 1 - b, span[a]) - np.maximum(a, L - 1 - span[b]) + 1
            ops += float(((n - L + 1) * np.maximum(width, 0)).sum())
        ops += 3 * (n + 1) ** 2  # the level's tables filled
    return ops


def constrained_bytes(n: int, c: int, height: int) -> float:
    arrays = len(forest_chain(c)) + 2
    return float(height * 2 * arrays * (n + 1) ** 2 * 8)


class _Levels:
    """C_h for h = 1..height - 1 with their forest tables, and the top page's choice, for one
    price per page.

    The top level is needed for the whole range only, so it is a prefix recurrence
    T(j, s) = min_r T(r - 1, s - 1) + C_{height-1}(r, j) (the textbook form of the forest
    recurrence on row 0): O(top n^2) instead of the O(n^3 log c) of a full level.
    ``top`` = w < c asks for the tree whose top page holds exactly w keys (the piece a budgeted
    re-cut of w page keys needs)."""

    def __init__(self, p: np.ndarray, q: np.ndarray, c: int, height: int, lam: float, top: int | None = None) -> None:
        n = p.size
        self.n, self.c, self.height = n, c, height
        self.top = c if top is None else top
        P = np.concatenate([[0.0], np.cumsum(p)])
        Q = np.concatenate([[0.0], np.cumsum(q)])
        W = np.full((n + 1, n + 1), np.inf)  # W[i, L] = weight of keys i+1..i+L and gaps i..i+L
        for L in range(0, n + 1):
            i = np.arange(n - L + 1)
            W[i, L] = (P[i + L] - P[i]) + (Q[i + L + 1] - Q[i])
        self.split = forest_chain(c)
        self.levels: list[tuple[dict, dict]] = []  # per 2 <= h < height: forest tables over C_{h-1}
        base = np.full((n + 1, n + 1), np.inf)
        short = np.arange(n + 1) <= c
        base[:, short] = W[:, short] + lam
        base[:, 0] = 0.0
        C = base  # C_h as start-indexed [i, L]
        for h in range(2, height):
            start, end = self._forests(C, self.split, c, reach(h - 1, c))
            C = base.copy()
            C[:, c + 1 :] = W[:, c + 1 :] + lam + start[c][:, c + 1 :]
            self.levels.append((start, end))
        self._top_page(C, float(W[0, n]) + lam, base[0, n])

    def _top_page(self, C: np.ndarray, page: float, single: float) -> None:
        """T(j, s) over subtrees of cost C = C_{height-1}, and the value of the whole tree."""
        n, w = self.n, self.top
        self._T = None
        if self.height == 1 or (w == self.c and n <= self.c):
            self._value = float(single)
            return
        by_end = np.full((n + 1, n + 1), np.inf)  # by_end[j, r] = C(r, j) for r <= j, else inf
        for r in range(n + 1):
            by_end[r:, r] = C[r, : n + 1 - r]
        self._by_end = by_end
        T = [by_end[:, 0].copy()]  # T[k][j] = T(j, k); T(j, 0) = C(0, j)
        for _k in range(1, w + 1):  # root key r (1-based, r <= j) closes the k-th subtree
            T.append((T[-1][None, :-1] + by_end[:, 1:]).min(axis=1))
        self._T = T
        self._value = page + float(T[w][n])

    def _forests(self, C: np.ndarray, split: dict, top: int, sub_keys: int) -> tuple[dict, dict]:
        """Forest tables G(., ., s) over subtrees with costs C (start- and end-indexed), for
        forests of ``top`` roots and the sizes ``split`` builds them from.

        Subtrees hold at most ``sub_keys`` keys (the capacity of their height), so a forest of
        s roots spans at most s + (s + 1) sub_keys keys: longer ranges and split positions
        whose parts overflow stay infinite and are skipped (exact, and most of the work of the
        lower levels)."""
        n = self.n
        longest = length_limits(split, (top,), n)
        span = forest_reach(split, top, sub_keys, n)
        for s in split:
            longest[s] = min(longest[s], span[s])
        lefts = {a for a, _ in split.values()} | {0, top}
        rights = {b for _, b in split.values()} | {0}
        start = {s: np.full((n + 1, n + 1), np.inf) for s in lefts}
        end = {s: np.full((n + 1, n + 1), np.inf) for s in rights}
        start[0][:] = C
        for L in range(0, n + 1):  # end[0][j, n - L] = C(j - L, j)
            j = np.arange(L, n + 1)
            end[0][j, n - L] = C[j - L, L]
        buf = np.empty(min(ROW_BLOCK, (n + 1) ** 2) + n + 1)
        g = np.empty(n + 1)
        order = sorted(split)
        for L in range(1, n + 1):
            m = n - L + 1
            for s in order:
                if s > L:
                    break
                if L > longest[s]:
                    continue
                a, b = split[s]
                lo, hi = max(a, L - 1 - span[b]), min(L - 1 - b, span[a])  # left part lengths
                if lo > hi:
                    continue
                left = start[a][:m, lo : hi + 1]
                right = end[b][L:, n - L + 1 + lo : n - L + 2 + hi]
                row_min_of_sums(left, right, buf, g[:m])
                if s in start:
                    start[s][:m, L] = g[:m]
                if s in end:
                    end[s][L:, n - L] = g[:m]
        return start, end

    def value(self, height: int) -> float:
        return self._value

    def _top_keys(self) -> np.ndarray:
        """0-based root keys of the top page, walking T back from (n, top): only the rows on
        the path are minimised again, so no argmin table is kept."""
        keys, j = [], self.n
        for k in range(self.top, 0, -1):
            r = 1 + int(np.argmin(self._T[k - 1][:-1] + self._by_end[j, 1:]))
            keys.append(r - 1)
            j = r - 1
        return np.asarray(keys[::-1], dtype=np.int64)

    def rebuild(self, height: int) -> Layout:
        n, c = self.n, self.c

        def roots(i: int, j: int, h: int) -> tuple[np.ndarray, int]:
            if h == height:
                return self._top_keys(), h - 1
            start, end = self.levels[h - 2]
            out: list[int] = []
            forest_roots(ForestTables(self.split, start, end), i, j, c, out)
            return np.asarray(out) - 1, h - 1

        if self._T is None:
            return _one_page(n, c)
        return build_top_down(n, c, roots, height)


def _one_page(n: int, c: int) -> Layout:
    b = LayoutBuilder(n, c)
    if n:
        b.add(np.arange(n))
    return b.build()


def solve_within(
    hist: Histogram, c: int, max_pages: int | None, max_height: int, steps: int = BISECTION_STEPS
) -> ConstrainedResult:
    """Best classic B-tree of at most ``max_height`` levels and ``max_pages`` pages found by the
    price-per-page bisection, with the Lagrangian dual bound (see the module docstring)."""
    n, total = hist.n, hist.total
    if n <= c:
        layout = _one_page(n, c)
        reads = 1.0 if n and total > 0 else 0.0
        return ConstrainedResult(layout, reads, reads, True, 0)
    height = max_height
    if height < min_height(n, c):
        raise ValueError("height below the minimum: the caller checks this")

    def levels(lam: float) -> tuple[Layout, float]:
        lv = _Levels(hist.p, hist.q, c, height, lam)
        return lv.rebuild(height), lv.value(height)

    return price_bisection(levels, max_pages, height, n, total, steps)


def solve_window_within(hist: Histogram, c: int, top: int, max_pages: int | None, height: int) -> ConstrainedResult:
    """Best piece over ``hist``'s keys whose top page holds exactly ``top`` keys, at most
    ``height`` levels (the top included) and ``max_pages`` pages (the top included), by the same
    price bisection; the piece a budgeted re-cut of ``top`` neighbouring page keys swaps in."""
    if not 1 <= top <= min(c, hist.n - 1) or hist.n <= c or height < 2:
        raise ValueError(f"a window of {top} keys needs more than c = {c} keys and two levels")
    if top + (top + 1) * ((c + 1) ** (height - 1) - 1) < hist.n:
        raise ValueError(f"{hist.n} keys do not fit under {top} top keys in {height} levels")

    def levels(lam: float) -> tuple[Layout, float]:
        lv = _Levels(hist.p, hist.q, c, height, lam, top)
        return lv.rebuild(height), lv.value(height)

    return price_bisection(levels, max_pages, height, hist.n, hist.total)


def price_bisection(
    levels, max_pages: int | None, height: int, n: int, total: float, steps: int = BISECTION_STEPS
) -> ConstrainedResult:
    """The cheapest price-optimal tree within ``max_pages``, and the dual bound, for any family:
    ``levels(lam)`` returns the lam-optimal tree and its value (cost + lam x pages)."""
    scale = total if total > 0 else 1.0
    runs = 0

    def solve(lam: float) -> tuple[Layout, float, float]:
        nonlocal runs
        runs += 1
        layout, obj = levels(lam)
        return layout, obj, obj - lam * layout.pages  # layout, cost + lam pages, cost

    layout, obj, cost = solve(0.0)
    if max_pages is None or layout.pages <= max_pages:
        reads = cost / scale
        return ConstrainedResult(layout, reads, reads, True, runs)
    best_layout, best_cost = None, np.inf
    dual = obj  # lam = 0: the height-limited optimum is a bound too
    lo_lam, hi_lam = 0.0, scale * (height + 1) / max(1, n)
    while True:  # raise the price until the cheapest tree fits
        layout, obj, cost = solve(hi_lam)
        dual = max(dual, obj - hi_lam * max_pages)
        if layout.pages <= max_pages:
            best_layout, best_cost = layout, cost
            break
        lo_lam, hi_lam = hi_lam, hi_lam * 4
        if hi_lam > scale * (height + 1) * 4**3:  # beyond any cost difference: min pages must come
            raise AssertionError("no tree within the page budget: the caller checks the minimum")
    for _ in range(steps):
        mid = 0.5 * (lo_lam + hi_lam)
        layout, obj, cost = solve(mid)
        dual = max(dual, obj - mid * max_pages)
        if layout.pages <= max_pages:
            hi_lam = mid
            if cost < best_cost:
                best_layout, best_cost = layout, cost
        else:
            lo_lam = mid
        if best_cost <= dual * (1 + 1e-12):
            break
    reads = best_cost / scale
    bound = min(dual / scale, reads)
    return ConstrainedResult(best_layout, reads, bound, best_cost <= dual * (1 + 1e-9) + 1e-12, runs)
