"""B+-tree layouts: every key in a leaf of at most L keys, internal pages of at most F children.

Variable-depth shape (a static, read-only index): leaves may sit at different depths. Every
lookup costs the depth of the leaf covering it, so with w_k = hits on key k plus the misses
routed to its leaf (the gap after k; gap 0 goes to the first leaf) the cost is
sum_k w_k depth(leaf(k)). With ranges (i, j] of keys i+1..j and lambda(i, j) their weight:

    A(i, j) = lambda(i, j)                         if j - i <= L   (one leaf)
    A(i, j) = lambda(i, j) + H(i, j, F)            otherwise       (an internal page)
    H(i, j, s) = min_{i<r<j} G(i, r, a) + G(r, j, s - a)           (2..s children, a from bplus_chain)
    G(i, j, 1) = A(i, j),  G(i, j, s) = min(A(i, j), H(i, j, s))   (at most s subtrees)

Splitting a forest of at most s subtrees into at most a and at most s - a subtrees is exact
(every split point is tried), so only the O(log F) sizes of an addition chain (bplus_chain) are tabulated:
O(n^3 log F) time like the classic solver. Leaves cover ranges of at most L keys in one page,
which is optimal for such a range (any internal page only adds lambda).
"""

from __future__ import annotations

from collections import deque
from dataclasses import dataclass

import numpy as np

from ..histogram import Histogram
from ..layout import Layout, LayoutBuilder
from .exact import ROW_BLOCK, fits_int32, row_min_of_sums, table_type
from .uniform import bplus_height, leaf_count, uniform_bplus

__all__ = ["bplus_height", "leaf_count", "uniform_bplus"]  # the even split lives in uniform.py


def bplus_weights(hist: Histogram) -> np.ndarray:
    """Per-key weight of the lookups its leaf answers: hits plus the misses routed to it."""
    if hist.n == 0:
        return np.zeros(0)
    w = hist.p + hist.q[1:]
    w[0] += hist.q[0]
    return w


@dataclass(frozen=True)
class BplusExact:
    layout: Layout
    objective: float


def bplus_chain(F: int) -> dict[int, tuple[int, int]]:
    """Forest sizes (at most s subtrees) needed for H(., ., F), each with its split: an addition
    chain for F by the binary method (s even: s/2 + s/2; s odd: (s-1) + 1)."""
    split: dict[int, tuple[int, int]] = {}
    todo = [F]
    while todo:
        s = todo.pop()
        if s <= 1 or s in split:
            continue
        split[s] = (s // 2, s // 2) if s % 2 == 0 else (s - 1, 1)
        todo += list(split[s])
    return split


def bplus_work(n: int, F: int) -> float:
    """Element operations of the exact B+ solver."""
    return float(len(bplus_chain(F)) * n**3 / 6)


def build_bplus_top_down(n: int, L: int, F: int, children, state=None) -> Layout:
    """The one top-down builder of the B+-tree constructions: every range of at most L keys is a
    leaf; ``children(lo, hi, state)`` splits a longer range lo..hi-1 into the (lo, hi) ranges of
    its page's children, left to right, and returns the state handed to them."""
    b = LayoutBuilder(n, L, "bplus", F)
    if n == 0:
        return b.build()
    todo = deque([(0, n, -1, -1, state)])
    while todo:
        lo, hi, parent, slot, st = todo.popleft()
        if hi - lo <= L:
            b.add(np.arange(lo, hi), parent, slot, leaf=True)
            continue
        kids, child_state = children(lo, hi, st)
        page = b.add(np.array([a for a, _ in kids[1:]], dtype=np.int64), parent, slot, leaf=False)
        for k, (a, z) in enumerate(kids):
            todo.append((a, z, page, k, child_state))
    return b.build()


def solve_bplus_exact(hist: Histogram, L: int, F: int, integer: bool | None = None) -> BplusExact:
    """Optimal variable-depth B+-tree (leaves <= L keys, <= F children); O(n^3 log F).

    Whole counts use int32 tables when they provably fit (exact, about 2x faster), like the
    classic solver; ``integer=False`` forces float64."""
    n = hist.n
    if n <= L:
        b = LayoutBuilder(n, L, "bplus", F)
        if n:
            b.add(np.arange(n), leaf=True)
        return BplusExact(b.build(), 1.0 if n and hist.total > 0 else 0.0)
    w = bplus_weights(hist)
    if integer is None or integer:
        integer = fits_int32(w, bplus_height(n, L, F))
    t = _tables(w, L, F, integer)
    layout = _rebuild(t, n, L, F)
    return BplusExact(layout, float(t.A_start[0, n]) / hist.total if hist.total > 0 else 0.0)


@dataclass
class _T:
    split: dict
    A_start: np.ndarray  # [i, len] = A(i, i+len)
    G_start: dict  # s -> [i, len] = G(i, i+len, s)   (s = 1 is A)
    G_end: dict  # s -> [j, n-len] = G(j-len, j, s)
    H: np.ndarray  # [i, len] = H(i, i+len, F)


def _tables(w: np.ndarray, L: int, F: int, integer: bool = False) -> _T:
    n = w.size
    split = bplus_chain(F)
    lefts = {a for a, _ in split.values()} | {1}
    rights = {b for _, b in split.values()} | {1}
    dtype, inf = table_type(integer)
    G_start = {s: np.full((n + 1, n + 1), inf, dtype=dtype) for s in lefts}
    G_end = {s: np.full((n + 1, n + 1), inf, dtype=dtype) for s in rights}
    A_start = G_start[1]
    H = np.full((n + 1, n + 1), inf, dtype=dtype)
    W = np.concatenate([[0.0], np.cumsum(w)])
    order = sorted(split)
    buf = np.empty(ROW_BLOCK + n + 1, dtype=dtype)
    for ln in range(1, n + 1):
        m = n - ln + 1
        lam = (W[ln:] - W[:m]).astype(dtype)
        hs = {}
        if ln >= 2:
            for s in order:
                a, b = split[s]
                left = G_start[a][:m, 1:ln]  # left lengths 1..ln-1
                right = G_end[b][ln:, n - ln + 1 : n]  # column n-len: right lengths ln-1..1
                hs[s] = np.empty(m, dtype=dtype)
                row_min_of_sums(left, right, buf, hs[s])
        A = lam if ln <= L else lam + hs[F]
        A_start[:m, ln] = A
        if 1 in G_end:
            G_end[1][ln:, n - ln] = A
        if ln > L:
            H[:m, ln] = hs[F]
        for s in order:
            g = np.minimum(A, hs[s]) if s in hs else A
            if s in G_start:
                G_start[s][:m, ln] = g
            if s in G_end:
                G_end[s][ln:, n - ln] = g
    return _T(split, A_start, G_start, G_end, H)


def _forest_value(t: _T, s: int, i: int, j: int) -> float:
    n = t.A_start.shape[0] - 1
    if s in t.G_start:
        return t.G_start[s][i, j - i]
    return t.G_end[s][j, n - (j - i)]


def _children(t: _T, i: int, j: int, F: int) -> list[tuple[int, int]]:
    """Child ranges of an optimal internal page over (i, j], left to right."""
    n = t.A_start.shape[0] - 1
    out: list[tuple[int, int]] = []
    stack = [(i, j, F, True)]  # (range, at most s subtrees, must split into >= 2)
    while stack:
        a0, b0, s, must = stack.pop()
        ln = b0 - a0
        if s == 1 or ln < 2 or (not must and _forest_value(t, s, a0, b0) == t.A_start[a0, ln]):
            out.append((a0, b0))
            continue
        a, b = t.split[s]
        left = t.G_start[a][a0, 1:ln]
        right = t.G_end[b][b0, n - ln + 1 : n]
        r = a0 + 1 + int(np.argmin(left + right))
        stack.append((r, b0, b, False))
        stack.append((a0, r, a, False))
    return out


def _rebuild(t: _T, n: int, L: int, F: int) -> Layout:
    return build_bplus_top_down(n, L, F, lambda i, j, _s: (_children(t, i, j, F), None))


def full_leaves_exact(hist: Histogram, L: int, F: int) -> Layout:
    """Leaves filled left to right with L keys, then the exact DP over the leaves' weights picks
    the internal pages (a leaf of one "key" per leaf); for up to a few hundred leaves."""
    n = hist.n
    leaves = leaf_count(n, L)
    w = bplus_weights(hist)
    leaf_w = np.add.reduceat(w, np.arange(0, n, L)) if n else np.zeros(0)
    return _expand_leaves(solve_bplus_exact(Histogram(leaf_w, np.zeros(leaves + 1)), 1, F).layout, n, L, F)


def full_leaves_balanced(hist: Histogram, L: int, F: int, spread: float = 0.1) -> Layout:
    """Leaves filled left to right with L keys; internal pages weight-balanced over the leaves."""
    n = hist.n
    leaves = leaf_count(n, L)
    w = bplus_weights(hist)
    leaf_w = np.add.reduceat(w, np.arange(0, n, L)) if n else np.zeros(0)
    return _expand_leaves(balanced_bplus(Histogram(leaf_w, np.zeros(leaves + 1)), 1, F, spread), n, L, F)


def _expand_leaves(top: Layout, n: int, L: int, F: int) -> Layout:
    """Turn a tree over leaf ordinals (one "key" per leaf) into one over full leaves of L keys."""
    b = LayoutBuilder(n, L, "bplus", F)
    for page in range(top.pages):
        par, sl = int(top.parent[page]), int(top.slot[page])
        if top.leaf[page]:
            t = int(top.keys_of(page)[0])
            b.add(np.arange(t * L, min(n, (t + 1) * L)), par, sl, leaf=True)
        else:
            b.add(top.keys_of(page) * L, par, sl, leaf=False)
    return b.build()


def balanced_bplus(hist: Histogram, L: int, F: int, spread: float = 0.1) -> Layout:
    """Near-optimal variable-depth B+-tree: each internal page cuts its range's weight into F
    near-equal parts (``spread`` times the mean weight added per key so unread keys still
    spread out); ranges of at most L keys become leaves. O(n log n)."""
    n = hist.n
    if n == 0:
        return LayoutBuilder(0, L, "bplus", F).build()
    w = bplus_weights(hist)
    w = w + spread * (w.sum() / n if w.sum() > 0 else 1.0)
    cum = np.concatenate([[0.0], np.cumsum(w)])

    def cut(lo: int, hi: int, _state) -> tuple[list[tuple[int, int]], None]:
        parts = min(F, hi - lo)
        targets = cum[lo] + (cum[hi] - cum[lo]) * np.arange(1, parts) / parts
        cuts = np.unique(np.clip(np.searchsorted(cum[lo + 1 : hi], targets) + lo + 1, lo + 1, hi - 1))
        edges = np.concatenate([[lo], cuts, [hi]]).tolist()
        return list(zip(edges[:-1], edges[1:], strict=False)), None

    return build_bplus_top_down(n, L, F, cut)


def leaves_to_tree(n: int, L: int, F: int, starts: np.ndarray, height: int) -> Layout:
    """A B+-tree over the given leaves (first key rank of each, ascending), every leaf at depth
    ``height`` when 2..F children per internal page allow it, internal pages splitting evenly."""
    b = LayoutBuilder(n, L, "bplus", F)
    ends = np.concatenate([starts[1:], [n]])
    todo = deque([(0, starts.size, -1, -1, height)])
    while todo:
        lo, hi, parent, slot, h = todo.popleft()
        count = hi - lo
        if count == 1:
            b.add(np.arange(starts[lo], ends[lo]), parent, slot, leaf=True)
            continue
        low, high = 2 ** (h - 2), F ** (h - 2)
        m = max(2, -(-count // high))
        if count // m < low or m > F:
            h = 1 + int(np.ceil(np.log(count) / np.log(F) - 1e-12))
            m = max(2, -(-count // F ** (h - 2)))
        runs = np.full(m, count // m, dtype=np.int64)
        runs[: count % m] += 1
        edges = lo + np.concatenate([[0], np.cumsum(runs)])
        page = b.add(starts[edges[1:-1]], parent, slot, leaf=False)
        for t in range(m):
            todo.append((int(edges[t]), int(edges[t + 1]), page, t, h - 1))
    return b.build()


def hot_leaf_starts(w: np.ndarray, L: int, k: int, max_leaves: int) -> np.ndarray | None:
    """Leaf boundaries packing the heaviest runs of L consecutive keys into k leaves of their own.

    Greedy: take the heaviest window of L keys, then the heaviest not overlapping any taken,
    k times (vectorised per round over all windows); the keys between taken windows fill
    leaves of L keys. None if that needs more than ``max_leaves`` leaves (a taller tree).
    """
    n = w.size
    if n <= L:
        return np.array([0])
    cum = np.concatenate([[0.0], np.cumsum(w)])
    win = cum[L:] - cum[:-L]  # window starting at i covers i..i+L-1
    taken = np.zeros(win.size, dtype=bool)
    blocked = np.zeros(win.size, dtype=bool)
    for _ in range(k):
        cand = np.where(blocked, -np.inf, win)
        i = int(np.argmax(cand))
        if not np.isfinite(cand[i]) or cand[i] <= 0:
            break
        taken[i] = True
        blocked[max(0, i - L + 1) : i + L] = True
    picks = np.nonzero(taken)[0]
    starts = []
    pos = 0
    for i in picks.tolist() + [n]:
        while pos < i:  # fill the gap pos..i-1 with leaves of up to L keys
            starts.append(pos)
            pos = min(i, pos + L)
        if i < n:
            starts.append(i)
            pos = i + L
    starts = np.array(sorted(set(starts)), dtype=np.int64)
    return starts if starts.size <= max_leaves else None


def hot_first_bplus(hist: Histogram, L: int, F: int, extra_levels: int = 0) -> Layout:
    """Near-optimal variable-depth B+-tree that lifts single hot keys into shallow leaves.

    An internal page over a range gives its hottest keys leaves of their own (a leaf may be one
    key) and hangs the runs between them as further subtrees, as many hot keys as the fanout
    allows once every run fits below in the remaining height (the even split's height plus
    ``extra_levels``). Runs too long are cut evenly. Scattered hot keys then sit at depth 2, 3, ...
    instead of sharing deep leaves with thousands of cold keys. O(n log n).
    """
    n = hist.n
    w = bplus_weights(hist)
    rank = np.empty(n, dtype=np.int64)
    rank[np.argsort(-w, kind="stable")] = np.arange(n)  # 0 = hottest

    def hottest(lo: int, hi: int, h: int) -> tuple[list[tuple[int, int]], int]:
        cap = L * F ** (h - 2)  # keys a child subtree of h-1 levels can hold
        return _hot_children(rank[lo:hi], lo, hi, F, cap), h - 1

    return build_bplus_top_down(n, L, F, hottest, bplus_height(n, L, F) + extra_levels)


def _hot_children(rank: np.ndarray, lo: int, hi: int, F: int, cap: int) -> list[tuple[int, int]]:
    """Child ranges of a page over lo..hi-1: the hottest keys alone, the runs between them cut
    into pieces of at most ``cap`` keys, at most F children in all (fewer hot keys if needed)."""
    size = hi - lo
    hottest = np.argsort(rank, kind="stable")
    t = min((F - 1) // 2, size)
    while True:
        hot = np.sort(hottest[:t]) + lo
        edges = [lo]
        for x in hot.tolist():
            edges += [x, x + 1]
        edges.append(hi)
        kids = []
        for a, z in zip(edges[:-1], edges[1:], strict=False):
            if z <= a:
                continue
            pieces = -(-(z - a) // cap)
            bounds = a + (np.arange(pieces + 1) * (z - a)) // pieces
            kids += list(zip(bounds[:-1].tolist(), bounds[1:].tolist(), strict=False))
        if len(kids) <= F or t == 0:
            break
        t = max(0, min(t - 1, t - (len(kids) - F + 1) // 2))
    if len(kids) > F or len(kids) < 2:
        # no hot keys fit, or the whole range fits one child: an internal page needs 2..F
        # children, so cut the range evenly into as few pieces of at most ``cap`` keys as
        # possible, at least two (the range is longer than a leaf, so it has at least two keys)
        m = min(F, size, max(2, -(-size // cap)))
        bounds = lo + (np.arange(m + 1) * size) // m
        kids = [(a, z) for a, z in zip(bounds[:-1].tolist(), bounds[1:].tolist(), strict=False) if z > a]
    return kids
