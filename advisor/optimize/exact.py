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

from dataclasses import dataclass

import numpy as np

from ..histogram import Histogram
from ..layout import Layout, LayoutBuilder
from .topdown import build_top_down


@dataclass(frozen=True)
class ExactResult:
    layout: Layout
    objective: float  # C(0, n) / total weight, the DP's own figure


def textbook_work(n: int, c: int) -> tuple[float, float]:
    """(element operations, bytes) of the textbook O(c n^3) recurrence."""
    if n <= c:
        return float(n), 0.0
    L = np.arange(1, n + 1, dtype=np.float64)
    s_max = np.minimum(c, L)
    ops = (n - L + 1) * (s_max * (L + 1) - s_max * (s_max + 1) / 2)
    return float(ops.sum()), float((c + 3) * (n + 1) ** 2 * 8)


def solve_textbook(hist: Histogram, c: int) -> ExactResult:
    """The plain O(c n^3) recurrence above; the reference the fast solver is tested against."""
    p, q, n = hist.p, hist.q, hist.n
    if n <= c:
        return _one_page(hist, c)
    tables = _tables(p, q, c)
    layout = _rebuild(tables, n, c)
    return ExactResult(layout, float(tables.Cs[0, n] / hist.total) if hist.total > 0 else 0.0)


def _one_page(hist: Histogram, c: int) -> ExactResult:
    b = LayoutBuilder(hist.n, c)
    if hist.n:
        b.add(np.arange(hist.n))
    return ExactResult(b.build(), 1.0 if hist.total > 0 and hist.n else 0.0)


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
    return build_top_down(n, c, lambda i, j, _s: (np.asarray(_root_keys(t, i, j, c)) - 1, None))


# ---------------------------------------------------------------------------------------------
# The fast exact solver: forests combined by halving instead of one key at a time.
#
# G(i, j, s) = cheapest forest of s root keys and s + 1 subtrees covering (i, j] (G(., ., 0) = C).
# Splitting the forest at its a-th root key r gives, for any 1 <= a <= s,
#     G(i, j, s) = min_r G(i, r-1, a-1) + G(r, j, s-a),
# which is the textbook recurrence when a = s. Taking a = floor(s/2) + 1 halves s at each step,
# so only the O(log c) forest sizes in halving_chain(c) are ever tabulated, and the work drops
# from O(c n^3) to O(n^3 log c) with the same optimum (the split is exact, not a heuristic).
# Forest sizes s can only cover ranges of at least s keys, so large s are cheap.
# ---------------------------------------------------------------------------------------------


def halving_chain(c: int) -> dict[int, tuple[int, int]]:
    """Forest sizes needed for G(., ., c), each mapped to its (left, right) split."""
    split: dict[int, tuple[int, int]] = {}
    todo = [c]
    while todo:
        s = todo.pop()
        if s == 0 or s in split:
            continue
        split[s] = (s // 2, s - s // 2 - 1)
        todo += list(split[s])
    return split


def exact_work(n: int, c: int) -> tuple[float, float]:
    """(element operations, bytes) the halving solver needs for n keys and capacity c."""
    if n <= c:
        return float(n), 0.0
    L = np.arange(1, n + 1, dtype=np.float64)
    ops = 0.0
    for s in halving_chain(c):
        width = np.maximum(L - s + 1, 0)  # feasible positions of the split key
        ops += float(((n - L + 1) * width).sum())
    arrays = 2 * (len(halving_chain(c)) + 1)
    return ops, float(arrays * (n + 1) ** 2 * 8)


def solve_exact(hist: Histogram, c: int) -> ExactResult:
    """Return an optimal classic B-tree layout of capacity ``c`` and its DP objective.

    O(n^3 log c) time, O(n^2 log c) memory; equal to :func:`solve_textbook` (tested).
    """
    n = hist.n
    if n <= c:
        return _one_page(hist, c)
    t = _halving_tables(hist.p, hist.q, c)
    layout = _halving_rebuild(t, n, c)
    return ExactResult(layout, float(t.start[0][0, n] / hist.total) if hist.total > 0 else 0.0)


@dataclass
class _HalvingTables:
    split: dict
    start: dict  # s -> array [i, L] = G(i, i + L, s), for s used as a left part (and 0 = C)
    end: dict  # s -> array [j, n - L] = G(j - L, j, s), for s used as a right part (and 0 = C);
    # columns run by n - L so that the right parts of one row minimisation are a forward slice


def _halving_tables(p: np.ndarray, q: np.ndarray, c: int) -> _HalvingTables:
    n = p.size
    split = halving_chain(c)
    lefts = {a for a, _ in split.values()} | {0}
    rights = {b for _, b in split.values()} | {0}
    start = {s: np.full((n + 1, n + 1), np.inf) for s in lefts | {c}}
    end = {s: np.full((n + 1, n + 1), np.inf) for s in rights}
    start[0][:, 0] = 0.0
    end[0][:, n] = 0.0
    P = np.concatenate([[0.0], np.cumsum(p)])
    Q = np.concatenate([[0.0], np.cumsum(q)])
    order = sorted(split)
    buf = np.empty((n + 1) * (n + 1) // 2 + n + 1)
    for L in range(1, n + 1):
        m = n - L + 1
        for s in order:
            if s > L:
                break
            a, b = split[s]
            lo, hi = a, L - 1 - b  # left part length in [a, L-1-b]
            left = start[a][:m, lo : hi + 1]
            right = end[b][L:, n - L + 1 + lo : n - L + 2 + hi]  # [i, t] = G(i+lo+t+1, i+L, b)
            g = np.add(left, right, out=buf[: m * (hi - lo + 1)].reshape(m, hi - lo + 1)).min(axis=1)
            if s in start:
                start[s][:m, L] = g
            if s in end:
                end[s][L:, n - L] = g
        i = np.arange(m)
        w = (P[i + L] - P[i]) + (Q[i + L + 1] - Q[i])
        C = w if L <= c else w + start[c][:m, L]
        start[0][:m, L] = C
        end[0][L:, n - L] = C
    return _HalvingTables(split, start, end)


def _forest_roots(t: _HalvingTables, i: int, j: int, s: int, out: list) -> None:
    """Append the 1-based root keys of an optimal s-key forest on (i, j], left to right."""
    stack = [(i, j, s, False, 0)]
    while stack:
        i, j, s, emit, r = stack.pop()
        if emit:
            out.append(r)
            continue
        if s == 0:
            continue
        a, b = t.split[s]
        L = j - i
        lo, hi = a, L - 1 - b
        n = t.start[0].shape[0] - 1
        left = t.start[a][i, lo : hi + 1]
        right = t.end[b][j, n - L + 1 + lo : n - L + 2 + hi]
        r = i + lo + int(np.argmin(left + right)) + 1
        # process left forest, then r, then right forest (stack: push in reverse)
        stack.append((r, j, b, False, 0))
        stack.append((0, 0, 0, True, r))
        stack.append((i, r - 1, a, False, 0))


def _halving_rebuild(t: _HalvingTables, n: int, c: int) -> Layout:
    def roots(i: int, j: int, _state) -> tuple[np.ndarray, None]:
        out: list[int] = []
        _forest_roots(t, i, j, c, out)
        return np.asarray(out) - 1, None

    return build_top_down(n, c, roots)
