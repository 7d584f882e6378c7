"""B+-tree layouts within a page and height budget: hot leaves hung close to the root.

The leaves are fixed first (full leaves of L keys, or a packing that gives the hottest runs
leaves of their own, see :func:`advisor.optimize.bplus.hot_leaf_starts`); the internal pages
are then chosen over the m leaves as items, like the classic construction of
:mod:`advisor.optimize.within` with c replaced by F - 1. Facts used (fanout F >= 2):

* a tree over x leaves needs at least ceil((x - 1) / (F - 1)) internal pages (it has
  x + pages - 1 child slots in use and at most F per page), and that many suffice within h levels
  whenever x <= F^(h-1) (a complete F-ary shape: leaves may sit at different depths);
* a run of s leaves hung below one page as k pieces (k = ceil(s / F^(h-2)) is the fewest, each
  piece a subtree of h - 1 levels, a piece of one leaf being the leaf itself) needs
  ceil((s - k) / (F - 1)) internal pages, reached when all pieces but one hold 1 + a multiple of
  F - 1 leaves; hanging r = (s - k) mod (F - 1) of its leaves directly saves one more page.

Top-down, a page over a run of leaves takes the hottest leaves as direct children one by one,
keeping each only while the page can still be completed within F children and its budget; the
pieces between them are cut so each takes an equal share of the remaining weight, and spare
pages are shared by weight. With those facts the budget never runs out (the invariant: budget
>= the least a run needs), so every result is within the budget by construction.
"""

from __future__ import annotations

import bisect
from collections import deque

import numpy as np

from ..histogram import Histogram
from ..layout import Layout, LayoutBuilder
from .bplus import bplus_weights, hot_leaf_starts, leaf_count
from .within import share_spare

HOT_RUNS_MAX = 512  # most hot runs given leaves of their own (a vectorised pass each)


def fewest_internal(x: int, F: int) -> int:
    return -(-(x - 1) // (F - 1)) if x > 1 else 0


def full_leaf_starts(n: int, L: int) -> np.ndarray:
    return np.arange(0, n, L, dtype=np.int64)


def bplus_within_layout(
    hist: Histogram, L: int, F: int, max_pages: int, max_height: int, starts: np.ndarray | None = None, tries: int = 2
) -> Layout | None:
    """A B+-tree over the given leaves (default: full leaves) within the budget, or None when
    even the fewest internal pages over those leaves exceed it or they need more levels."""
    n = hist.n
    b = LayoutBuilder(n, L, "bplus", F)
    if n == 0:
        return b.build()
    starts = full_leaf_starts(n, L) if starts is None else np.asarray(starts, dtype=np.int64)
    m = starts.size
    ends = np.concatenate([starts[1:], [n]])
    if m == 1:
        if max_pages < 1 or max_height < 1:
            return None
        b.add(np.arange(n), -1, -1, leaf=True)
        return b.build()
    if m + fewest_internal(m, F) > max_pages or max_height < 2 or m > F ** (max_height - 1):
        return None
    w = bplus_weights(hist)
    cum = np.concatenate([[0.0], np.cumsum(w)])
    item_w = cum[ends] - cum[starts]
    item_cum = np.concatenate([[0.0], np.cumsum(item_w)])
    todo = deque([(0, m, max_height, max_pages - m, -1, -1)])
    while todo:
        a, z, h, budget, parent, slot = todo.popleft()
        if z - a == 1:
            b.add(np.arange(starts[a], ends[a]), parent, slot, leaf=True)
            continue
        pieces = _page(item_w, item_cum, a, z, F, h, budget, tries)
        page = b.add(starts[[lo for lo, _ in pieces[1:]]], parent, slot, leaf=False)
        need = [fewest_internal(hi - lo, F) for lo, hi in pieces]
        slack = budget - 1 - sum(need)
        # a piece needing no internal page (one leaf) cannot use spare pages
        share = share_spare(slack, [float(item_cum[hi] - item_cum[lo]) for lo, hi in pieces], need, least_useful=1)
        for t, (lo, hi) in enumerate(pieces):
            todo.append((lo, hi, h - 1, need[t] + share[t], page, t))
    return b.build()


def _plan(runs: list[int], F: int, sub: int, slots: int):
    """Pieces per run, leaves hung directly per run, and internal pages below, or None."""
    k = [-(-s // sub) if s > 0 else 0 for s in runs]
    spare = slots - sum(k)
    if spare < 0:
        return None
    excess = [s - kk for s, kk in zip(runs, k, strict=True)]
    pages = sum(-(-x // (F - 1)) for x in excess)
    direct = [0] * len(runs)
    for r, t in sorted(((x % (F - 1) or F - 1), t) for t, x in enumerate(excess) if x > 0):
        if r > spare:
            break
        spare -= r
        direct[t] = r
        pages -= 1
    return k, direct, pages


def _page(item_w, item_cum, a: int, z: int, F: int, h: int, budget: int, tries: int) -> list[tuple[int, int]]:
    """Children (item ranges, left to right) of the page over items a..z-1."""
    size = z - a
    if size <= F:
        return [(t, t + 1) for t in range(a, z)]
    sub = F ** (h - 2)
    chosen, runs, plan = _choose_direct(item_w[a:z], size, F, sub, budget, tries)
    kids = _children(item_cum[a : z + 1] - item_cum[a], chosen, runs, plan, F, sub)
    if len(kids) < 2:  # one piece alone: split it (never more pages, one more slot)
        lo, hi = kids[0]
        kids = [(lo, lo + 1), (lo + 1, hi)]
    return [(a + lo, a + hi) for lo, hi in kids if hi > lo]


def _choose_direct(local: np.ndarray, size: int, F: int, sub: int, budget: int, tries: int):
    """The hottest leaves hung directly under the page while it can still be completed within
    F children and its budget: (chosen local items, runs between them, their plan)."""
    k = min(size, tries * F)
    top = np.argpartition(-local, k - 1)[:k] if k < size else np.arange(size)
    top = top[np.argsort(-local[top], kind="stable")]
    chosen: list[int] = []
    runs = [size]
    plan = _plan(runs, F, sub, F)
    for x in top.tolist():
        if len(chosen) >= F - 1 or local[x] <= 0:
            break
        i = bisect.bisect_left(chosen, x)
        left_edge = chosen[i - 1] if i > 0 else -1
        right_edge = chosen[i] if i < len(chosen) else size
        trial = runs[:i] + [x - left_edge - 1, right_edge - x - 1] + runs[i + 1 :]
        got = _plan(trial, F, sub, F - len(chosen) - 1)
        if got is None or got[2] + 1 > budget:
            continue
        chosen.insert(i, x)
        runs, plan = trial, got
    if plan is None or plan[2] + 1 > budget:  # excluded by the invariant (module docstring)
        raise AssertionError("run not completable within its budget")
    return chosen, runs, plan


def _children(lc: np.ndarray, chosen: list[int], runs: list[int], plan, F: int, sub: int) -> list[tuple[int, int]]:
    """The page's children in order: per run its directly hung leaves (from its heavier end) and
    its pieces, then the chosen leaf after it."""
    k, direct, _pages = plan
    kids: list[tuple[int, int]] = []
    edges = [-1] + chosen + [len(lc) - 1]
    for t, s in enumerate(runs):
        first, r = edges[t] + 1, direct[t]
        if s:
            heavy_left = lc[first + r] - lc[first] >= lc[first + s] - lc[first + s - r] if r else True
            hung = list(range(first, first + r)) if heavy_left else list(range(first + s - r, first + s))
            pieces = _pieces(lc, first + r if heavy_left else first, s - r, k[t], F, sub)
            singles = [(x, x + 1) for x in hung]
            kids += singles + pieces if heavy_left else pieces + singles
        if t < len(chosen):
            kids.append((chosen[t], chosen[t] + 1))
    return kids


def _pieces(lc: np.ndarray, first: int, length: int, k: int, F: int, sub: int) -> list[tuple[int, int]]:
    """k pieces of items first..first+length-1, at most ``sub`` items each, every piece but the
    last 1 + a multiple of F - 1 items (so they need the fewest internal pages), each taking an
    equal share of the remaining weight (hot stretches end in small, shallow pieces)."""
    if length <= 0 or k <= 0:
        return []
    out = []
    pos, extra, end, per = first, length - k, first + length, (sub - 1) // (F - 1)
    for t in range(k - 1):
        pieces_left = k - t
        m_lo = max(0, -(-(extra - (pieces_left - 1) * (sub - 1)) // (F - 1)))
        m_hi = min(per, extra // (F - 1))
        goal = lc[pos] + (lc[end] - lc[pos]) / pieces_left
        want = int(np.searchsorted(lc, goal, side="left")) - pos
        mult = min(max(int(round((want - 1) / (F - 1))), m_lo), m_hi)
        size = 1 + mult * (F - 1)
        out.append((pos, pos + size))
        pos += size
        extra -= mult * (F - 1)
    out.append((pos, end))
    return out


def hot_leaf_candidates(hist: Histogram, L: int, F: int, max_pages: int) -> list[np.ndarray]:
    """Leaf packings worth trying within ``max_pages``: full leaves, and hot runs given leaves of
    their own for as many runs as the spare pages can pay for (each costs about one leaf)."""
    n = hist.n
    full = full_leaf_starts(n, L)
    out = [full]
    m = full.size
    spare = max_pages - m - fewest_internal(m, F)
    w = bplus_weights(hist)
    cap = min(2 * spare, HOT_RUNS_MAX)  # each run costs a pass over the keys
    for k in sorted({spare // 2, spare, 8, 32, 128, cap}):
        if k < 1 or k > cap:
            continue
        starts = hot_leaf_starts(w, L, k, max_pages)
        if starts is not None and starts.size + fewest_internal(starts.size, F) <= max_pages:
            out.append(starts)
    return out


__all__ = ["bplus_within_layout", "fewest_internal", "hot_leaf_candidates", "leaf_count"]
