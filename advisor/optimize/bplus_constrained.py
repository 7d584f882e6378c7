"""Exact B+-tree optima under a height limit and a page budget (small inputs).

With lam a price per page and w the per-key weights of :func:`bplus_weights`, A_h(i, j) is the
cheapest subtree of at most h levels on keys i+1..j (cost + lam x pages):

    A_h(i, j) = w(i, j) + lam                          if j - i <= L (one leaf is best)
    A_h(i, j) = w(i, j) + lam + H_{h-1}(i, j)          otherwise, h >= 2
    H_{h-1}(i, j) = min over 2..F consecutive parts of the sum of A_{h-1} over the parts,

the forest of at most s parts split along the addition chain of ``bplus_chain`` (exact: every
split point is tried). As in :mod:`advisor.optimize.constrained`, a bisection on lam finds the
cheapest lam-optimal tree within the page budget, and max over lam of (value - lam x budget) is
a lower bound on every tree within the budget (weak duality). Checked against brute force over
every B+-tree (n <= 7) in the tests.
"""

from __future__ import annotations

import numpy as np

from ..histogram import Histogram
from ..layout import Layout, LayoutBuilder
from .bplus import bplus_chain, bplus_height, bplus_weights
from .constrained import BISECTION_STEPS, ConstrainedResult, price_bisection


def bplus_constrained_work(n: int, F: int, height: int) -> float:
    return float(len(bplus_chain(F)) * n**3 / 6) * max(1, height - 1)


class _Levels:
    def __init__(self, w: np.ndarray, L: int, F: int, height: int, lam: float) -> None:
        n = w.size
        self.n, self.L, self.F = n, L, F
        S = np.concatenate([[0.0], np.cumsum(w)])
        lengths = np.arange(n + 1)
        ii = np.arange(n + 1)[:, None]
        W = np.where(ii + lengths[None, :] <= n, S[np.minimum(ii + lengths[None, :], n)] - S[ii], np.inf)
        self.split = bplus_chain(F)
        leaf = np.where((lengths[None, :] >= 1) & (lengths[None, :] <= L), W + lam, np.inf)
        self.A = [leaf]  # A[h - 1][i, len]
        self.G: list[dict] = []  # per h >= 2: s -> [i, len] forests of at most s parts over A_{h-1}
        for _h in range(2, height + 1):
            G = self._forests(self.A[-1])
            A = leaf.copy()
            long = lengths > L
            A[:, long] = W[:, long] + lam + G[F][:, long]
            self.G.append(G)
            self.A.append(A)

    def _forests(self, A: np.ndarray) -> dict:
        """G[s][i, len]: cheapest split of keys i+1..i+len into 2..s parts (s = 1: A itself)."""
        n = self.n
        G = {1: A}
        for s in sorted(self.split):
            a, b = self.split[s]
            out = np.full((n + 1, n + 1), np.inf)
            for ln in range(2, n + 1):
                m = n - ln + 1
                i = np.arange(m)[:, None]
                t = np.arange(1, ln)[None, :]  # left part length
                left = _at_most(G, a, A)[i, t]
                right = _at_most(G, b, A)[i + t, ln - t]
                out[:m, ln] = (left + right).min(axis=1)
            G[s] = out
        return G

    def value(self, height: int) -> float:
        return float(self.A[height - 1][0, self.n])

    def rebuild(self, height: int) -> Layout:
        n, L, F = self.n, self.L, self.F
        b = LayoutBuilder(n, L, "bplus", F)
        todo = [(0, n, height, -1, -1)]
        while todo:
            nxt = []
            for i, ln, h, parent, slot in todo:
                if ln <= L:
                    b.add(np.arange(i, i + ln), parent, slot, leaf=True)
                    continue
                parts: list[tuple[int, int]] = []
                self._parts(self.G[h - 2], self.A[h - 2], i, ln, F, parts, split=True)
                page = b.add(np.asarray([p for p, _ in parts[1:]], dtype=np.int64), parent, slot, leaf=False)
                nxt += [(p, q, h - 1, page, t) for t, (p, q) in enumerate(parts)]
            todo = nxt
        return b.build()

    def _parts(self, G: dict, A: np.ndarray, i: int, ln: int, s: int, out: list, split: bool = False) -> None:
        """Append (start, length) of the optimal parts of keys i+1..i+ln: at most s of them, or
        (``split``: an internal page's children) 2..s of them."""
        if s == 1 or (not split and A[i, ln] <= G[s][i, ln]):
            out.append((i, ln))
            return
        a, b = self.split[s]
        t = np.arange(1, ln)
        cost = _at_most(G, a, A)[i, t] + _at_most(G, b, A)[i + t, ln - t]
        k = int(t[int(np.argmin(cost))])
        self._parts(G, A, i, k, a, out)
        self._parts(G, A, i + k, ln - k, b, out)


def _at_most(G: dict, s: int, A: np.ndarray) -> np.ndarray:
    """At most s parts: the single subtree, or a split into 2..s."""
    return A if s == 1 else np.minimum(A, G[s])


def solve_bplus_within(
    hist: Histogram, L: int, F: int, max_pages: int | None, max_height: int, steps: int = BISECTION_STEPS
) -> ConstrainedResult:
    """Best B+-tree of at most ``max_height`` levels and ``max_pages`` pages found by the
    price-per-page bisection, with the Lagrangian dual bound."""
    n, total = hist.n, hist.total
    if n <= L:
        b = LayoutBuilder(n, L, "bplus", F)
        if n:
            b.add(np.arange(n), -1, -1, leaf=True)
        reads = 1.0 if n and total > 0 else 0.0
        return ConstrainedResult(b.build(), reads, reads, True, 0)
    if max_height < bplus_height(n, L, F):
        raise ValueError("height below the minimum: the caller checks this")
    w = bplus_weights(hist)

    def levels(lam: float) -> tuple[Layout, float]:
        lv = _Levels(w, L, F, max_height, lam)
        return lv.rebuild(max_height), lv.value(max_height)

    return price_bisection(levels, max_pages, max_height, n, total, steps)
