"""Local exact re-cut: re-choose a few neighbouring keys of a page, solving the subtrees below.

Take a page P and w consecutive keys of it. Those keys and the w + 1 subtrees around them
cover one key range U (from P's key before the window to P's key after it). Every lookup in U
reads P and the pages above it whatever U's inside looks like, so swapping the w keys and their
subtrees for the best tree piece on U whose top holds w keys (``solve_exact(..., root_keys=w)``)
changes the total cost by exactly (new subtrees' cost - old subtrees' cost), never upwards.
Windows slide over each page, heaviest pages first, until a sweep finds nothing or the work
budget is spent. The result is a local optimum: the planner still reports the gap to a bound.

This is the "solve the top levels exactly, then repair" idea made safe: each accepted move is
an exact optimum of its piece, and a piece's cost does not depend on the rest of the tree.
"""

from __future__ import annotations

import heapq
from dataclasses import dataclass, field

import numpy as np

from ..histogram import Histogram
from ..layout import Layout, LayoutBuilder
from .constrained import EVALUATIONS, constrained_work, solve_window_within
from .exact import exact_work, solve_exact
from .uniform import min_height


@dataclass
class _Node:
    keys: list[int]  # ascending global key ranks
    kids: list[_Node | None]  # one per slot, len(keys) + 1
    exact: bool = False  # an exact optimum of its own range: nothing below can improve
    cost: float | None = field(default=None, repr=False)  # C(subtree), cached


def recut(
    layout: Layout,
    hist: Histogram,
    ops_budget: float = 1e9,
    width: int = 4,
    max_window_ops: float = 1.2e9,
    passes: int = 4,
    max_pages: int | None = None,
    max_height: int | None = None,
) -> Layout:
    """Improve a classic B-tree layout by exact re-cuts of windows of up to ``width`` keys.

    Each page uses the widest window whose typical range the exact solver can afford: wider
    windows let keys move further (in a check at n = 2,000: 4 keys gained most at c = 20, 2
    keys at c = 5).

    Passes repeat while they gain: a deeper page improved in one pass changes what its
    parent's windows trade off in the next.

    With ``max_pages`` / ``max_height`` every piece is the best one within the levels left
    below its page and the pages its old subtrees used plus the layout's spare pages, so the
    result stays within both (the price-per-page DP of :func:`solve_window_within`)."""
    c, n = layout.capacity, layout.n_keys
    if layout.structure != "btree" or layout.pages <= 1 or n <= c:
        return layout
    pages_left = None if max_pages is None else [max_pages - layout.pages]
    limited = max_pages is not None or max_height is not None
    # windows over more keys than ``cap`` are skipped unsolved
    cap = _largest_affordable(c, max_window_ops, limited, max_height or 2)
    if not _root_window_fits(layout.keys_of(0).tolist(), n, cap):
        # most lookups are decided at the top; when the root's one-key windows mostly are too
        # large for the exact solver, the deeper re-cuts alone were measured to gain about 0.1%
        # (1M keys, in a bench_scale run) for several seconds of work
        return layout
    root = _to_nodes(layout)
    P = np.concatenate([[0.0], np.cumsum(hist.p)])
    Q = np.concatenate([[0.0], np.cumsum(hist.q)])

    def weight(lo: int, hi: int) -> float:  # keys lo..hi-1 and gaps lo..hi
        return float(P[hi] - P[lo] + Q[hi + 1] - Q[lo])

    job = _Pass(hist, weight, c, width, cap, [ops_budget], max_height, pages_left)
    for _ in range(passes):
        if not _one_pass(root, job, n) or job.budget[0] <= 0:
            break
        root = _to_nodes(_to_layout(root, n, c))  # fresh nodes: every page may be re-cut again
    return _to_layout(root, n, c)


@dataclass
class _Pass:
    """What one pass of re-cuts shares: the weights, capacity, window limits and work left.

    Without limits a window's piece is the unconstrained optimum; with ``max_height`` or
    ``pages_left`` (spare pages of the whole layout, as a one-element list) it is the best piece
    within the levels left below the page and the old subtrees' pages plus the spare ones."""

    hist: Histogram
    weight: object  # weight(lo, hi) of keys lo..hi-1 and gaps lo..hi
    c: int
    width: int
    cap: int
    budget: list  # [work left], spent by every window solved
    max_height: int | None = None
    pages_left: list | None = None

    @property
    def limited(self) -> bool:
        return self.max_height is not None or self.pages_left is not None

    def work(self, size: int, depth: int) -> float:
        if not self.limited:
            return _window_work(size, self.c)
        return constrained_work(size, self.c, self._levels(depth, size)) * EVALUATIONS

    def _levels(self, depth: int, size: int) -> int:
        """Levels a piece may use, its top included (no height limit: two more than it needs,
        always room for any w >= 1 top keys)."""
        return self.max_height - depth + 1 if self.max_height is not None else min_height(size, self.c) + 2

    def piece(self, begin: int, end: int, w: int, old: list, depth: int) -> tuple[_Node, int] | None:
        """The best piece on keys begin..end-1 under w top keys, and the pages it adds."""
        sub = Histogram(self.hist.p[begin:end], self.hist.q[begin : end + 1])
        if not self.limited:
            return _to_nodes(solve_exact(sub, self.c, root_keys=w).layout, shift=begin, exact=True), 0
        had = sum(_subtree_pages(k) for k in old if k is not None)
        allowance = None if self.pages_left is None else had + self.pages_left[0] + 1
        res = solve_window_within(sub, self.c, w, allowance, self._levels(depth, end - begin))
        return _to_nodes(res.layout, shift=begin, exact=res.proven), res.layout.pages - 1 - had

    def taken(self, extra_pages: int) -> None:
        if self.pages_left is not None:
            self.pages_left[0] -= extra_pages


def _one_pass(root: _Node, job: _Pass, n: int, sweeps: int = 3) -> bool:
    """One top-down pass of sliding re-cuts, heaviest pages first; True when any was taken."""
    weight, budget = job.weight, job.budget
    improved = False
    bounds = {id(root): (0, n, 1)}  # key range [lo, hi) and depth of each node still to visit
    heap = [(-weight(0, n), 0, root)]
    order = 1
    while heap and budget[0] > 0:
        _, _, node = heapq.heappop(heap)
        lo, hi, depth = bounds.pop(id(node))
        tried: set[tuple[int, int, int]] = set()  # windows solved without gain: same range, same answer
        for _ in range(sweeps):
            if not _sweep(node, lo, hi, depth, job, tried):
                break
            improved = True
        for i, kid in enumerate(node.kids):
            if kid is not None and not kid.exact and kid.keys and len(kid.kids) > 1 and any(kid.kids):
                klo = node.keys[i - 1] + 1 if i > 0 else lo
                khi = node.keys[i] if i < len(node.keys) else hi
                bounds[id(kid)] = (klo, khi, depth + 1)
                heapq.heappush(heap, (-weight(klo, khi), order, kid))
                order += 1
    return improved


def _window_width(node: _Node, lo: int, hi: int, width: int, cap: int) -> tuple[int, np.ndarray]:
    """The widest window (up to ``width`` keys) whose typical range fits the exact solver, and
    the range sizes of every window of that width."""
    edges = np.array([lo - 1] + node.keys + [hi])
    for w in range(min(width, len(node.keys)), 0, -1):
        sizes = edges[w + 1 :] - edges[: -w - 1] - 1
        if np.median(sizes) <= cap:
            break
    return w, sizes


def _sweep(node: _Node, lo: int, hi: int, depth: int, job: _Pass, tried: set) -> bool:
    """Slide the window over one page's keys once, taking every exact re-cut that gains."""
    c, cap, weight = job.c, job.cap, job.weight
    w, sizes = _window_width(node, lo, hi, job.width, cap)
    changed = False
    for a in np.nonzero((sizes > c) & (sizes <= cap))[0].tolist():
        begin = node.keys[a - 1] + 1 if a > 0 else lo
        end = node.keys[a + w] if a + w < len(node.keys) else hi
        size = end - begin  # recomputed: a re-cut earlier in this sweep may have moved keys
        if size <= c or size > cap or (begin, end, w) in tried:
            continue
        work = job.work(size, depth)
        if work > job.budget[0]:
            continue
        job.budget[0] -= work
        old_kids = node.kids[a : a + w + 1]
        old = sum(_subtree_cost(k, weight) for k in old_kids if k is not None)
        piece, extra_pages = job.piece(begin, end, w, old_kids, depth)
        new = sum(_subtree_cost(k, weight) for k in piece.kids if k is not None)
        if new < old - 1e-9 * max(old, 1.0):
            job.taken(extra_pages)
            node.keys[a : a + w] = piece.keys
            node.kids[a : a + w + 1] = piece.kids
            node.cost = None
            changed = True
        else:
            tried.add((begin, end, w))
    return changed


def _root_window_fits(root_keys: list[int], n: int, cap: int) -> bool:
    """True when the root's affordable one-key windows cover at least half of the keys below
    it (a few small windows inside a hot cluster are not enough: measured no gain at 1M keys)."""
    edges = np.array([-1] + root_keys + [n])
    kids = np.diff(edges) - 1  # keys in each child range
    fits = kids[:-1] + kids[1:] + 1 <= cap  # window a: child ranges a and a + 1 and key a
    covered = np.zeros(kids.size, dtype=bool)
    covered[:-1] |= fits
    covered[1:] |= fits
    return 2 * int(kids[covered].sum()) >= int(kids.sum())


def _largest_affordable(c: int, max_ops: float, limited: bool = False, height: int = 2) -> int:
    """Largest range the exact solver handles within ``max_ops`` (binary search on its work)."""
    lo, hi = c, 1 << 20
    while lo < hi:
        mid = (lo + hi + 1) // 2
        work = constrained_work(mid, c, height) * EVALUATIONS if limited else _window_work(mid, c)
        if work <= max_ops:
            lo = mid
        else:
            hi = mid - 1
    return lo


def _window_work(size: int, c: int) -> float:
    """Exact DP work of one window of ``size`` keys: the w-key top adds at most half again."""
    return exact_work(size, c)[0] * 1.5


def _subtree_pages(node: _Node) -> int:
    return 1 + sum(_subtree_pages(k) for k in node.kids if k is not None)


def _subtree_cost(node: _Node, weight) -> float:
    """C(subtree): every lookup in the subtree's range reads its root, then its own child."""
    if node.cost is None:
        lo, hi = _span(node)
        node.cost = weight(lo, hi) + sum(_subtree_cost(k, weight) for k in node.kids if k is not None)
    return node.cost


def _span(node: _Node) -> tuple[int, int]:
    left, right = node, node
    while left.kids[0] is not None:
        left = left.kids[0]
    while right.kids[-1] is not None:
        right = right.kids[-1]
    return left.keys[0], right.keys[-1] + 1


def _to_nodes(layout: Layout, shift: int = 0, exact: bool = False) -> _Node:
    nodes = [
        _Node([int(k) + shift for k in layout.keys_of(p)], [None] * (layout.keys_of(p).size + 1), exact)
        for p in range(layout.pages)
    ]
    for p in range(1, layout.pages):
        nodes[int(layout.parent[p])].kids[int(layout.slot[p])] = nodes[p]
    return nodes[0]


def _to_layout(root: _Node, n: int, c: int) -> Layout:
    b = LayoutBuilder(n, c)
    todo = [(root, -1, -1)]
    while todo:
        nxt = []
        for node, parent, slot in todo:
            page = b.add(np.asarray(node.keys, dtype=np.int64), parent, slot)
            nxt += [(k, page, s) for s, k in enumerate(node.kids) if k is not None]
        todo = nxt
    return b.build()
