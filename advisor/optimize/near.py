"""Near-optimal layouts for tables too large for the exact DP.

Top-down weight balancing, the multiway form of Mehlhorn's bisection rule (Mehlhorn, "Nearly
optimal binary search trees", Acta Informatica 5, 1975; multiway: Bose & Douieb, WADS 2009):
a range with more than c keys gets a full root page whose c keys cut the range's lookup mass
(hits and misses, in key order) as near as possible into c + 1 equal parts, so a key with
share x of the traffic ends near depth log_{c+1}(1/x). A blend parameter ``spread`` adds
``spread`` times the mean weight to every key and gap first: 0 follows the traffic only, large
values approach the even split, which matters where many keys are never looked up.
``hot_first_layout`` lifts the heaviest keys of each range into its page, subject to every
sub-range still fitting under the page in the even split's height, so it never gets taller than
the baseline. ``polish`` then replaces small subtrees of any layout by their exact optimum,
which is optimal for that sub-range on its own (a subtree's cost does not depend on the rest).

Nothing here claims optimality; the planner pairs it with a lower bound and reports the gap.
"""

from __future__ import annotations

import heapq
from collections import deque

import numpy as np

from ..histogram import Histogram
from ..layout import Layout, LayoutBuilder
from .bplus import bplus_work, solve_bplus_exact
from .exact import exact_work, solve_exact
from .topdown import build_top_down
from .uniform import min_height


def balanced_layout(hist: Histogram, c: int, spread: float = 0.0, pick_heaviest: bool = False) -> Layout:
    """Weight-balanced top-down layout; O(n log n).

    With ``pick_heaviest``, each cut takes the heaviest key within its share of the mass (the
    middle half-cell around the cut) instead of the key nearest the cut: still balanced, but a
    hot key near a cut is lifted instead of a cold one.
    """
    n = hist.n
    if n == 0:
        return LayoutBuilder(0, c).build()
    mean = hist.total / (2 * n + 1) if hist.total > 0 else 1.0
    bias = spread * mean if hist.total > 0 else 1.0
    pk = hist.p + bias
    qg = hist.q + bias
    seq = np.empty(2 * n + 1)
    seq[0::2] = qg
    seq[1::2] = pk
    cum = np.concatenate([[0.0], np.cumsum(seq)])  # cum[t] = mass of seq[:t]
    mid = cum[1:-1:2] + pk / 2  # key k's centre in the mass axis
    score = _key_scores(hist)
    pick = score if pick_heaviest else None
    return build_top_down(n, c, lambda lo, hi, _s: (_cut_points(cum, mid, lo, hi, c, pick), None))


def _cut_points(cum, mid, lo: int, hi: int, c: int, score=None) -> np.ndarray:
    """c distinct key ranks in [lo, hi) cutting the range's mass into near-equal parts."""
    a, z = cum[2 * lo], cum[2 * hi + 1]
    targets = a + (z - a) * np.arange(1, c + 1) / (c + 1)
    m = mid[lo:hi]
    pos = np.clip(np.searchsorted(m, targets), 1, hi - lo - 1)
    nearer_left = (targets - m[pos - 1]) <= (m[pos] - targets)
    nearest = np.where(nearer_left, pos - 1, pos)
    if score is not None:
        half = (z - a) / (c + 1) / 4
        w_lo = np.searchsorted(m, targets - half)
        w_hi = np.searchsorted(m, targets + half)  # window [w_lo, w_hi) of keys
        nearest = _window_argmax(score[lo:hi], w_lo, w_hi, nearest)
    pick = np.unique(nearest) + lo
    if pick.size < c:
        pick = _fill(cum, mid, lo, hi, pick, c)
    return pick


def _window_argmax(w: np.ndarray, starts: np.ndarray, stops: np.ndarray, default: np.ndarray) -> np.ndarray:
    """Index of the largest w in each window [start, stop) (non-decreasing bounds); default if empty."""
    out = default.copy()
    ok = stops > starts
    if not ok.any():
        return out
    s, e = starts[ok], stops[ok]
    lengths = e - s
    seg = np.repeat(np.arange(s.size), lengths)
    idx = np.arange(lengths.sum()) - np.repeat(np.cumsum(lengths) - lengths, lengths) + np.repeat(s, lengths)
    order = np.lexsort((-w[idx], seg))
    first = np.concatenate([[0], np.cumsum(lengths)[:-1]])
    out[ok] = idx[order[first]]
    return out


def _fill(cum, mid, lo, hi, pick, c):
    """Top up to c keys by cutting the heaviest remaining runs at their mass median."""
    chosen = set(int(x) for x in pick)
    edges = [lo - 1] + sorted(chosen) + [hi]
    heap = []
    for left, right in zip(edges[:-1], edges[1:], strict=False):
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


def heaviest_first_layout(hist: Histogram, c: int) -> Layout:
    """Simple greedy: each page takes its range's c heaviest keys. Good on scattered skew, bad
    when hot keys cluster (whole runs end up in one child); one candidate among several."""

    def heaviest(lo: int, hi: int, _state) -> tuple[np.ndarray, None]:
        return np.sort(np.argpartition(-hist.p[lo:hi], c - 1)[:c]) + lo, None

    return build_top_down(hist.n, c, heaviest)


def _key_scores(hist: Histogram) -> np.ndarray:
    """Weight a key saves when lifted: its hits plus half of each neighbouring gap's misses."""
    return hist.p + 0.5 * (hist.q[:-1] + hist.q[1:])


def hot_first_layout(hist: Histogram, c: int, extra_levels: int = 0, everywhere: bool = False) -> Layout:
    """Each page takes its range's heaviest keys such that every child range fits below it.

    A range of N keys gets the height budget h = min_height(N) + ``extra_levels`` (at the root
    only, or at every range when ``everywhere``);
    its page's c keys must leave runs of at most (c+1)^(h-1) - 1 keys between them. Start from
    the c heaviest keys, split over-long runs at evenly spaced keys, then drop the lightest keys
    whose removal keeps every run short enough. O(n log n) overall.
    """
    score = _key_scores(hist)

    def hottest(lo: int, hi: int, extra: int) -> tuple[np.ndarray, int]:
        size = hi - lo
        g = (c + 1) ** (min_height(size, c) - 1 + extra) - 1
        roots = _heaviest_within_runs(score[lo:hi], c, g)
        if roots is None:  # repair failed: fall back to the even split of this range
            roots = _even_roots(size, c)
        return roots + lo, (extra if everywhere else 0)

    return build_top_down(hist.n, c, hottest, extra_levels)


def _even_roots(size: int, c: int) -> np.ndarray:
    """c keys splitting ``size`` keys into c + 1 runs of near-equal length."""
    rest = size - c
    runs = np.full(c + 1, rest // (c + 1), dtype=np.int64)
    runs[: rest % (c + 1)] += 1
    return np.cumsum(runs)[:-1] + np.arange(c)


def _heaviest_within_runs(w: np.ndarray, c: int, g: int) -> np.ndarray | None:
    """c positions of high total weight leaving runs of at most g unchosen positions."""
    N = w.size
    chosen = np.sort(np.argpartition(-w, c - 1)[:c])
    edges = np.concatenate([[-1], chosen, [N]])
    runs = np.diff(edges) - 1
    bad = np.nonzero(runs > g)[0]
    if bad.size:
        extra = []
        for k in bad:
            a, z = int(edges[k]), int(edges[k + 1])
            length = z - a - 1
            need = -(-(length - g) // (g + 1))
            extra.append(a + np.round(np.arange(1, need + 1) * (length + 1) / (need + 1)).astype(np.int64))
        chosen = np.unique(np.concatenate([chosen] + extra))
    if chosen.size == c:
        return chosen
    # drop the lightest keys whose removal keeps both neighbouring runs merged within g
    keys = chosen.tolist()
    left = {x: (keys[i - 1] if i else -1) for i, x in enumerate(keys)}
    right = {x: (keys[i + 1] if i + 1 < len(keys) else N) for i, x in enumerate(keys)}
    heap = [(float(w[x]), x) for x in keys]
    heapq.heapify(heap)
    alive = len(keys)
    deferred = []
    while alive > c and heap:
        wt, x = heapq.heappop(heap)
        lx, rx = left[x], right[x]
        if rx - lx - 1 <= g:
            del left[x], right[x]
            if lx >= 0:
                right[lx] = rx
            if rx < N:
                left[rx] = lx
            alive -= 1
            for item in deferred:  # neighbours changed: retry keys set aside
                heapq.heappush(heap, item)
            deferred = []
        else:
            deferred.append((wt, x))
    if alive != c:
        return None
    return np.array(sorted(left), dtype=np.int64)


def subtree_ranges(layout: Layout) -> tuple[np.ndarray, np.ndarray]:
    """Smallest and largest key rank in every page's subtree."""
    keys, start, parent = layout.page_keys, layout.page_start, layout.parent
    lo = keys[start[:-1]].copy()
    hi = keys[start[1:] - 1].copy()
    depth = layout.depths()
    for d in range(int(depth.max()) if depth.size else 0, 1, -1):
        at = np.nonzero(depth == d)[0]
        np.minimum.at(lo, parent[at], lo[at])
        np.maximum.at(hi, parent[at], hi[at])
    return lo, hi


def polish(layout: Layout, hist: Histogram, ops_budget: float = 3e8, max_subtree_ops: float = 2e7) -> Layout:
    """Replace the largest affordable subtrees by their exact optimum (never raises the cost).

    A subtree over keys lo..hi (and gaps lo..hi+1) costs the same wherever it hangs, so the
    exact optimum of that range is at least as good in place. Subtrees are taken top-down, each
    within ``max_subtree_ops`` of DP work, until ``ops_budget`` is spent.
    """
    c, n = layout.capacity, layout.n_keys
    if layout.pages <= 1:
        return layout
    lo, hi = subtree_ranges(layout)
    kids: dict[int, list[tuple[int, int]]] = {}
    for page in range(1, layout.pages):
        kids.setdefault(int(layout.parent[page]), []).append((int(layout.slot[page]), page))
    b = LayoutBuilder(n, c, layout.structure, layout.fanout)
    bplus = layout.structure == "bplus"
    spent = 0.0
    todo = deque([(0, -1, -1)])
    while todo:
        page, parent, slot = todo.popleft()
        size = int(hi[page] - lo[page] + 1)
        work = bplus_work(size, layout.fanout) if bplus else exact_work(size, c)[0]
        if kids.get(page) and work <= max_subtree_ops and spent + work <= ops_budget:
            spent += work
            _graft_exact(b, hist, int(lo[page]), int(hi[page]) + 1, c, parent, slot, layout.fanout if bplus else 0)
            continue
        new = b.add(layout.keys_of(page), parent, slot, bool(layout.leaf[page]) if bplus else True)
        for s, child in sorted(kids.get(page, [])):
            todo.append((child, new, s))
    return b.build()


def _graft_exact(
    b: LayoutBuilder, hist: Histogram, lo: int, hi: int, c: int, parent: int, slot: int, fanout: int = 0
) -> None:
    """Solve keys lo..hi-1 (and their gaps) exactly and attach the subtree at (parent, slot).

    For a B+-tree (``fanout`` > 0) the gaps routed to these keys' leaves are gaps lo+1..hi
    (gap lo goes to the previous leaf unless lo = 0), so the sub-histogram shifts them."""
    if fanout:
        q = np.concatenate([[hist.q[0] if lo == 0 else 0.0], hist.q[lo + 1 : hi + 1]])
        sub = solve_bplus_exact(Histogram(hist.p[lo:hi], q), c, fanout).layout
    else:
        sub = solve_exact(Histogram(hist.p[lo:hi], hist.q[lo : hi + 1]), c).layout
    ids: list[int] = []
    for k in range(sub.pages):
        par = int(sub.parent[k])
        leaf = bool(sub.leaf[k]) if fanout else True
        ids.append(
            b.add(sub.keys_of(k) + lo, parent if par < 0 else ids[par], slot if par < 0 else int(sub.slot[k]), leaf)
        )
