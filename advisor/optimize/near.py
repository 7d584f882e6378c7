"""Near-optimal layouts for tables too large for the exact DP.

Top-down weight balancing, the multiway form of Mehlhorn's bisection rule (Mehlhorn, "Nearly
optimal binary search trees", Acta Informatica 5, 1975; multiway: Bose & Douieb, WADS 2009):
a range with more than c keys gets a full root page whose c keys cut the range's lookup mass
(hits and misses, in key order) as near as possible into c + 1 equal parts, so a key with
share x of the traffic ends near depth log_{c+1}(1/x). A blend parameter ``spread`` adds
``spread`` times the mean weight to every key and gap first: 0 follows the traffic only, large
values approach the even split, which matters where many keys are never looked up. Ranges small
enough are finished by the exact DP, which is optimal for that sub-range on its own.

Nothing here claims optimality; the planner pairs it with a lower bound and reports the gap.
"""

from __future__ import annotations

import heapq
from collections import deque

import numpy as np

from ..histogram import Histogram
from ..layout import Layout, LayoutBuilder
from .exact import _rebuild, _tables, exact_work

SUBTREE_EXACT_OPS = 2.0e5  # ranges whose DP costs at most this many element ops go exact


def balanced_layout(hist: Histogram, c: int, spread: float = 0.0) -> Layout:
    """Weight-balanced top-down layout; O(n log n) plus small exact sub-solves."""
    n = hist.n
    b = LayoutBuilder(n, c)
    if n == 0:
        return b.build()
    mean = hist.total / (2 * n + 1) if hist.total > 0 else 1.0
    bias = spread * mean if hist.total > 0 else 1.0
    pk = hist.p + bias
    qg = hist.q + bias
    seq = np.empty(2 * n + 1)
    seq[0::2] = qg
    seq[1::2] = pk
    cum = np.concatenate([[0.0], np.cumsum(seq)])  # cum[t] = mass of seq[:t]
    mid = cum[1:-1:2] + pk / 2  # key k's centre in the mass axis
    todo = deque([(0, n, -1, -1)])
    while todo:
        lo, hi, parent, slot = todo.popleft()
        size = hi - lo
        if size <= c:
            b.add(np.arange(lo, hi), parent, slot)
            continue
        if exact_work(size, c)[0] <= SUBTREE_EXACT_OPS:
            _graft_exact(b, hist, lo, hi, c, parent, slot)
            continue
        roots = _cut_points(cum, mid, lo, hi, c)
        page = b.add(roots, parent, slot)
        begins = np.concatenate([[lo], roots + 1])
        ends = np.concatenate([roots, [hi]])
        for t in range(c + 1):
            if ends[t] > begins[t]:
                todo.append((int(begins[t]), int(ends[t]), page, t))
    return b.build()


def _cut_points(cum: np.ndarray, mid: np.ndarray, lo: int, hi: int, c: int) -> np.ndarray:
    """c distinct key ranks in [lo, hi) cutting the range's mass into near-equal parts."""
    a, z = cum[2 * lo], cum[2 * hi + 1]
    targets = a + (z - a) * np.arange(1, c + 1) / (c + 1)
    m = mid[lo:hi]
    pos = np.clip(np.searchsorted(m, targets), 1, hi - lo - 1)
    nearer_left = (targets - m[pos - 1]) <= (m[pos] - targets)
    pick = np.unique(np.where(nearer_left, pos - 1, pos)) + lo
    if pick.size < c:
        pick = _fill(cum, mid, lo, hi, pick, c)
    return pick


def _fill(cum, mid, lo, hi, pick, c):
    """Top up to c keys by cutting the heaviest remaining runs at their mass median."""
    chosen = set(int(x) for x in pick)
    edges = [lo - 1] + sorted(chosen) + [hi]
    heap = []
    for left, right in zip(edges[:-1], edges[1:]):
        if right - left > 1:
            heapq.heappush(heap, (-(cum[2 * right] - cum[2 * left + 2]), left, right))
    while len(chosen) < c:
        _, left, right = heapq.heappop(heap)
        a, z = cum[2 * left + 2], cum[2 * right]
        k = int(np.searchsorted(mid[left + 1 : right], (a + z) / 2)) + left + 1
        k = min(max(k, left + 1), right - 1)
        chosen.add(k)
        for l2, r2 in ((left, k), (k, right)):
            if r2 - l2 > 1:
                heapq.heappush(heap, (-(cum[2 * r2] - cum[2 * l2 + 2]), l2, r2))
    return np.array(sorted(chosen), dtype=np.int64)


def _graft_exact(b: LayoutBuilder, hist: Histogram, lo: int, hi: int, c: int, parent: int, slot: int):
    """Solve keys lo..hi-1 (and their gaps) exactly and attach the subtree at (parent, slot)."""
    t = _tables(hist.p[lo:hi], hist.q[lo : hi + 1], c)
    sub = _rebuild(t, hi - lo, c)
    ids = []
    for k in range(sub.pages):
        par = sub.parent[k]
        ids.append(b.add(sub.keys_of(k) + lo, parent if par < 0 else ids[par], slot if par < 0 else int(sub.slot[k])))


def heaviest_first_layout(hist: Histogram, c: int) -> Layout:
    """Simple greedy: each page takes its range's c heaviest keys (a comparison point only)."""
    n = hist.n
    b = LayoutBuilder(n, c)
    if n == 0:
        return b.build()
    todo = deque([(0, n, -1, -1)])
    while todo:
        lo, hi, parent, slot = todo.popleft()
        if hi - lo <= c:
            b.add(np.arange(lo, hi), parent, slot)
            continue
        w = hist.p[lo:hi]
        roots = np.sort(np.argpartition(-w, c - 1)[:c]) + lo
        page = b.add(roots, parent, slot)
        begins = np.concatenate([[lo], roots + 1])
        ends = np.concatenate([roots, [hi]])
        for t in range(c + 1):
            if ends[t] > begins[t]:
                todo.append((int(begins[t]), int(ends[t]), page, t))
    return b.build()
