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
from functools import lru_cache

import numpy as np

from ..histogram import Histogram
from ..layout import Layout, LayoutBuilder
from .topdown import build_top_down
from .uniform import min_height


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
# The fast exact solver: forests combined along an addition chain, not one key at a time.
#
# G(i, j, s) = cheapest forest of s root keys and s + 1 subtrees covering (i, j] (G(., ., 0) = C).
# Splitting the forest at its a-th root key r gives, for any 1 <= a <= s,
#     G(i, j, s) = min_r G(i, r-1, a-1) + G(r, j, s-a),
# which is the textbook recurrence when a = s. With t = s + 1 (the number of subtrees), a split
# is t = t_left + t_right, so the forest sizes to tabulate form an addition chain ending at
# c + 1 (Knuth, TAOCP Vol. 2, 4.6.3). The binary method (t even: t/2 + t/2; t odd: (t-1) + 1)
# needs floor(log2 t) + popcount(t) - 1 sizes, fewer than plain halving; the work drops from
# O(c n^3) to O(n^3 log c) with the same optimum (each split is exact, not a heuristic).
#
# Three further savings, each exact:
# - a forest of s roots inside the root page's c-forest shares the range with c - s other
#   root keys, so it never spans more than n - (c - s) keys (``length_limits``);
# - G(., ., c) is only read for ranges of more than c keys (shorter ranges are one page);
# - with integer weights (lookup counts) the tables are int32 when every value provably fits
#   (all optimal costs are at most total weight x the even split's height): exact integer
#   arithmetic at half the memory traffic, about 2x faster than float64 on this machine kind.
# The row minimisations run in row blocks sized to stay in cache.
# ---------------------------------------------------------------------------------------------

FLOAT_OPS_PER_SECOND = 3.2e8  # element operations per second, float64 tables (this machine kind)
INT_OPS_PER_SECOND = 7.5e8  # the same with int32 tables; see benchmarks/results/exact.txt
_INT_LIMIT = 2**29  # largest cost kept in int32: two of them still add without overflow
ROW_BLOCK = 1 << 15  # elements per row block of one minimisation (256 KiB of float64)


def forest_chain(*sizes: int) -> dict[int, tuple[int, int]]:
    """Forest sizes needed for G(., ., s) for each given s, each mapped to its (left, right) split
    (binary method; one rule per size, so chains for several sizes merge consistently)."""
    split: dict[int, tuple[int, int]] = {}
    todo = list(sizes)
    while todo:
        s = todo.pop()
        if s == 0 or s in split:
            continue
        t = s + 1
        split[s] = (t // 2 - 1, t // 2 - 1) if t % 2 == 0 else (s - 1, 0)
        todo += list(split[s])
    return split


def length_limits(split: dict[int, tuple[int, int]], tops: tuple[int, ...], n: int) -> dict[int, int]:
    """Longest range each forest size is needed for: a part never spans its siblings' keys."""
    longest = {t: n for t in tops}
    for s in sorted(split, reverse=True):
        a, b = split[s]
        longest[a] = max(longest.get(a, 0), longest[s] - 1 - b)
        longest[b] = max(longest.get(b, 0), longest[s] - 1 - a)
    return longest


@lru_cache(maxsize=4096)
def exact_work(n: int, c: int, integer: bool = False) -> tuple[float, float]:
    """(element operations, bytes) the fast solver needs for n keys and capacity c."""
    if n <= c:
        return float(n), 0.0
    split = forest_chain(c)
    longest = length_limits(split, (c,), n)
    ops = 0.0
    for s in split:
        L = np.arange(c + 1 if s == c else s, longest[s] + 1, dtype=np.float64)
        ops += float(((n - L + 1) * (L - s + 1)).sum())  # rows x feasible split positions
    arrays = len({a for a, _ in split.values()} | {0, c}) + len({b for _, b in split.values()} | {0})
    return ops, float(arrays * (n + 1) ** 2 * (4 if integer else 8))


def exact_seconds(n: int, c: int, integer: bool = False) -> float:
    """Estimated run time of :func:`solve_exact` on this machine kind."""
    return exact_work(n, c, integer)[0] / (INT_OPS_PER_SECOND if integer else FLOAT_OPS_PER_SECOND)


def integer_weights(hist: Histogram, c: int) -> bool:
    """True when the weights are whole counts small enough for exact int32 tables."""
    return fits_int32(np.concatenate([hist.p, hist.q]), min_height(hist.n, c))


def fits_int32(w: np.ndarray, height: int) -> bool:
    """Whole weights whose optimal costs (at most total x a valid tree's height) fit int32 with
    room for adding two of them."""
    if not np.all(np.isfinite(w)) or not np.array_equal(w, np.rint(w)):
        return False
    return float(w.sum()) * max(1, height) < _INT_LIMIT


def table_type(integer: bool) -> tuple[type, float]:
    """(dtype, fill value) of DP tables: int32 with a finite sentinel that two can add without
    overflow, or float64 with inf. The fill is never read where a value is needed."""
    return (np.int32, _INT_LIMIT) if integer else (np.float64, np.inf)


def row_min_of_sums(left: np.ndarray, right: np.ndarray, buf: np.ndarray, out: np.ndarray) -> None:
    """out[i] = min_t left[i, t] + right[i, t], in row blocks of about ROW_BLOCK elements so the
    sums stay in cache (``buf`` holds at least one block)."""
    m, width = left.shape
    rows = max(1, ROW_BLOCK // max(width, 1))
    for r0 in range(0, m, rows):
        r1 = min(m, r0 + rows)
        block = buf[: (r1 - r0) * width].reshape(r1 - r0, width)
        np.add(left[r0:r1], right[r0:r1], out=block).min(axis=1, out=out[r0:r1])


def solve_exact(hist: Histogram, c: int, integer: bool | None = None, root_keys: int | None = None) -> ExactResult:
    """Return an optimal classic B-tree layout of capacity ``c`` and its DP objective.

    O(n^3 log c) time, O(n^2 log c) memory; equal to :func:`solve_textbook` (tested).
    ``integer`` picks int32 tables (None: whenever :func:`integer_weights` allows them).
    ``root_keys`` = w < c asks instead for the best tree whose root page holds exactly w keys
    (its w + 1 subtrees still optimal), the piece a local re-cut of w page keys needs; it
    requires n > c.
    """
    n = hist.n
    w = c if root_keys is None else root_keys
    if n <= c and w == c:
        return _one_page(hist, c)
    if not 1 <= w <= min(c, n - 1) or n <= c:
        raise ValueError(f"root_keys={root_keys} needs 1 <= root_keys <= c < n (c={c}, n={n})")
    if integer is None or integer:  # int32 only where it provably fits
        integer = integer_weights(hist, c)
    t = _forest_tables(hist.p, hist.q, c, integer, w)
    layout = _forest_rebuild(t, n, c, w)
    top = float(t.start[w][0, n]) + hist.total if w != c else float(t.start[0][0, n])
    return ExactResult(layout, top / hist.total if hist.total > 0 else 0.0)


@dataclass
class ForestTables:
    split: dict
    start: dict  # s -> array [i, L] = G(i, i + L, s), for s used as a left part (and 0 = C)
    end: dict  # s -> array [j, n - L] = G(j - L, j, s), for s used as a right part (and 0 = C);
    # columns run by n - L so that the right parts of one row minimisation are a forward slice


def _forest_tables(p: np.ndarray, q: np.ndarray, c: int, integer: bool = False, top: int | None = None) -> ForestTables:
    n = p.size
    dtype, inf = table_type(integer)
    top = c if top is None else top
    split = forest_chain(c, top)
    longest = length_limits(split, (c, top), n)
    lefts = {a for a, _ in split.values()} | {0, top}
    rights = {b for _, b in split.values()} | {0}
    start = {s: np.full((n + 1, n + 1), inf, dtype=dtype) for s in lefts | {c}}
    end = {s: np.full((n + 1, n + 1), inf, dtype=dtype) for s in rights}
    start[0][:, 0] = 0
    end[0][:, n] = 0
    P = np.concatenate([[0.0], np.cumsum(p)])
    Q = np.concatenate([[0.0], np.cumsum(q)])
    order = sorted(split)
    buf = np.empty(min(ROW_BLOCK, (n + 1) ** 2) + n + 1, dtype=dtype)
    g = np.empty(n + 1, dtype=dtype)
    for L in range(1, n + 1):
        m = n - L + 1
        for s in order:
            if s > L:
                break
            if L > longest[s] or (s == c and L <= c):
                continue  # never read: outside every enclosing forest, or a single page
            a, b = split[s]
            lo, hi = a, L - 1 - b  # left part length in [a, L-1-b]
            left = start[a][:m, lo : hi + 1]
            right = end[b][L:, n - L + 1 + lo : n - L + 2 + hi]  # [i, t] = G(i+lo+t+1, i+L, b)
            row_min_of_sums(left, right, buf, g[:m])
            if s in start:
                start[s][:m, L] = g[:m]
            if s in end:
                end[s][L:, n - L] = g[:m]
        i = np.arange(m)
        w = (P[i + L] - P[i]) + (Q[i + L + 1] - Q[i])
        C = w if L <= c else w + start[c][:m, L]
        start[0][:m, L] = C
        end[0][L:, n - L] = C
    return ForestTables(split, start, end)


def forest_roots(t: ForestTables, i: int, j: int, s: int, out: list) -> None:
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


def _forest_rebuild(t: ForestTables, n: int, c: int, top: int) -> Layout:
    def roots(i: int, j: int, size: int) -> tuple[np.ndarray, int]:
        out: list[int] = []
        forest_roots(t, i, j, size, out)
        return np.asarray(out) - 1, c

    return build_top_down(n, c, roots, top)
