"""Exact optimum: the multiway generalisation of Knuth's optimal search tree DP.

Knuth, "Optimum binary search trees", Acta Informatica 1 (1971); Vaishnavi, Kriegel & Wood,
"Optimum multiway search trees", Acta Informatica 14 (1980). With ranges (i, j] of keys
i+1..j and gaps i..j (1-based keys, 0 <= i <= j <= n):

    W(i, j) = sum_{i<l<=j} p_l + sum_{i<=l<=j} q_l,        C(i, i) = 0
    C(i, j) = W(i, j)                       if j - i <= c   (one page is best)
    C(i, j) = W(i, j) + F(i, j, c)          otherwise       (full-page lemma)
    F(i, j, 0) = C(i, j)
    F(i, j, s) = min_{i+s-1 < r <= j} F(i, r-1, s-1) + C(r, j)   (r = the s-th root key)

The full-page lemma: some optimal tree has every page with a non-empty child holding exactly
c keys (moving a child's extreme key up into a non-full parent makes nothing deeper). The
brute-force tests, which try every key subset for every page, confirm it on small cases.

Root monotonicity (Knuth's speed-up) is not used: it fails for multiway trees once miss
weights are positive (Gotlieb & Wood, Int. J. Computer Math. 9, 1981).

Time O(c n^3) in numpy row operations, memory O(c n^2) floats. The layout is rebuilt by
re-running each minimisation on one row, so no argmin tables are stored.
"""

from __future__ import annotations

from collections import deque
from dataclasses import dataclass

import numpy as np

from ..histogram import Histogram
from ..layout import Layout, LayoutBuilder


@dataclass(frozen=True)
class ExactResult:
    layout: Layout
    objective: float  # C(0, n) / total weight, the DP's own figure


def exact_work(n: int, c: int) -> tuple[float, float]:
    """(element operations, bytes) the DP needs for n keys and capacity c."""
    if n <= c:
        return float(n), 0.0
    L = np.arange(1, n + 1, dtype=np.float64)
    s_max = np.minimum(c, L)
    # sum over s=1..s_max of (n-L+1)(L-s+1)
    ops = (n - L + 1) * (s_max * (L + 1) - s_max * (s_max + 1) / 2)
    return float(ops.sum()), float((c + 3) * (n + 1) ** 2 * 8)


def solve_exact(hist: Histogram, c: int) -> ExactResult:
    """Return an optimal classic B-tree layout of capacity ``c`` and its DP objective."""
    p, q, n = hist.p, hist.q, hist.n
    if n == 0:
        return ExactResult(LayoutBuilder(0, c).build(), 0.0)
    total = hist.total
    if n <= c:
        b = LayoutBuilder(n, c)
        b.add(np.arange(n))
        return ExactResult(b.build(), 1.0 if total > 0 else 0.0)
    tables = _tables(p, q, c)
    cost = tables.Cs[0, n]
    layout = _rebuild(tables, n, c)
    return ExactResult(layout, float(cost / total) if total > 0 else 0.0)


@dataclass
class _Tables:
    Cs: np.ndarray  # Cs[i, L] = C(i, i + L)
    Ce: np.ndarray  # Ce[j, L] = C(j - L, j)
    F: list  # F[s][i, L] = F(i, i + L, s); F[0] is Cs


def _tables(p: np.ndarray, q: np.ndarray, c: int) -> _Tables:
    n = p.size
    P = np.concatenate([[0.0], np.cumsum(p)])
    Q = np.concatenate([[0.0], np.cumsum(q)])
    Cs = np.full((n + 1, n + 1), np.inf)
    Ce = np.full((n + 1, n + 1), np.inf)
    Cs[:, 0] = 0.0
    Ce[:, 0] = 0.0
    F = [Cs] + [np.full((n + 1, n + 1), np.inf) for _ in range(c)]
    for L in range(1, n + 1):
        m = n - L + 1  # starts i = 0..n-L
        rev = Ce[L:, :L][:, ::-1]  # rev[i, a] = C(i + a + 1, i + L)
        for s in range(1, min(c, L) + 1):
            a0 = s - 1
            cand = F[s - 1][:m, a0:L] + rev[:, a0:L]
            F[s][:m, L] = cand.min(axis=1)
        i = np.arange(m)
        w = (P[i + L] - P[i]) + (Q[i + L + 1] - Q[i])
        C = w if L <= c else w + F[c][:m, L]
        Cs[:m, L] = C
        Ce[L:, L] = C
    return _Tables(Cs, Ce, F)


def _root_keys(t: _Tables, i: int, j: int, c: int) -> list[int]:
    """1-based root keys r_1 < ... < r_c of an optimal root page for range (i, j]."""
    roots = []
    jj = j
    for s in range(c, 0, -1):
        L = jj - i
        a0 = s - 1
        cand = t.F[s - 1][i, a0:L] + t.Ce[jj, :L][::-1][a0:L]
        a = a0 + int(np.argmin(cand))
        r = i + a + 1
        roots.append(r)
        jj = r - 1
    return roots[::-1]


def _rebuild(t: _Tables, n: int, c: int) -> Layout:
    b = LayoutBuilder(n, c)
    todo = deque([(0, n, -1, -1)])
    while todo:
        i, j, parent, slot = todo.popleft()
        if j - i <= c:
            b.add(np.arange(i, j), parent, slot)
            continue
        roots = _root_keys(t, i, j, c)
        page = b.add(np.asarray(roots) - 1, parent, slot)
        bounds = [i] + roots
        ends = [r - 1 for r in roots] + [j]
        for k, (lo, hi) in enumerate(zip(bounds, ends)):
            if hi > lo:
                todo.append((lo, hi, page, k))
    return b.build()
