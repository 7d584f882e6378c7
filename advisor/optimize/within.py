"""Hot keys lifted toward the root without more pages or levels than a budget allows.

Facts used (classic B-tree, capacity c; a tree of height h holds at most
cap(h) = (c+1)^h - 1 keys, a multiple of c since (c+1)^h = 1 mod c):

* N keys need at least ceil(N / c) pages, and ceil(N / c) pages suffice at any height h with
  N <= cap(h): give the root c keys and the c + 1 runs below it sizes that are multiples of c
  (at most cap(h-1) each) except one, and recurse. So a budget of B >= ceil(N/c) pages and
  h >= the minimum height is always feasible, and every range below keeps that invariant.
* A run of g keys hung below one root slot region and cut by e keys into e + 1 pieces of at
  most cap(h-1) keys (e = ceil((g+1)/(cap(h-1)+1)) - 1 is the fewest) needs
  ceil((g - e) / c) pages at best, reached when all pieces but one hold multiples of c keys.
  Moving r more keys of it into the root, where r = (g - e) mod c, saves one more page.

The construction, top-down: a range of N keys with height h and page budget B takes the
hottest keys of the range into its root page one by one, keeping each only while the root can
still be completed (cuts so every run fits in h - 1 levels, spare root slots spent on the runs
closest to saving a page) within c keys and B pages. What is left of B after the root and the
least each run needs is shared among the runs by their lookup weight, so hot subtrees can lift
their own hot keys. O(n log n + pages c log c) in all.
"""

from __future__ import annotations

import bisect
from collections import deque

import numpy as np

from ..histogram import Histogram
from ..layout import Layout, LayoutBuilder
from .pilot_build import build_pilot
from .uniform import min_height
from .within_build import SATURATED, build_within
from .within_kernel import choose_root_keys


def capacity_of(c: int, h: int) -> int:
    """Most keys a classic B-tree of capacity c and height h holds."""
    return (c + 1) ** h - 1 if h > 0 else 0


def fewest_pages(n: int, c: int) -> int:
    return -(-n // c)


def _gap_plan(gaps: np.ndarray, c: int, sub: int, room: int):
    """Cuts per gap, keys moved up per gap, total root keys and pages below for given gaps.

    ``sub`` = cap(h-1), ``room`` = root slots left after the chosen keys. Returns
    (cuts, moved, keys_used, pages_below) as arrays and integers, or None when the cuts alone
    overflow the root."""
    gaps = np.asarray(gaps, dtype=np.int64)
    cuts = np.where(gaps > 0, -(-(gaps + 1) // (sub + 1)) - 1, 0)
    spare = room - int(cuts.sum())
    if spare < 0:
        return None
    left = gaps - cuts
    pages = int((-(-left // c)).sum())
    moved = np.zeros(gaps.size, dtype=np.int64)
    # spare slots take the keys that save a page most cheaply: the remainder r = x mod c of a
    # run (a whole page's c keys when the run is an exact multiple), smallest first (ties by
    # position), as long as they fit
    runs = np.nonzero(left > 0)[0]
    rem = left[runs] % c
    rem[rem == 0] = c
    order = np.lexsort((runs, rem))
    taken = int(np.searchsorted(np.cumsum(rem[order]), spare, side="right"))
    pick = order[:taken]
    moved[runs[pick]] = rem[pick]
    used = int(rem[pick].sum())
    return cuts, moved, room - (spare - used), pages - taken


def within_budget_layout(
    hist: Histogram,
    c: int,
    max_pages: int,
    max_height: int,
    tries: int = 2,
    fill_first: bool = False,
    hot_share: float = 1.0,
) -> Layout:
    """A layout of at most ``max_pages`` pages and ``max_height`` levels that lifts hot keys.

    Requires ``max_pages >= ceil(n / c)`` and ``max_height >= min_height(n, c)`` (always
    enough, see the module docstring). ``tries`` x c of each range's hottest keys are offered
    to its root page. ``hot_share`` < 1 offers only that share of a root's slots to hot keys
    first, then cuts that split the range's lookup weight evenly: where hot keys sit side by
    side, a root full of them leaves few non-empty children and the next-hottest keys two levels
    down; cuts around the cluster give them pages of their own one level down.
    """
    if hist.n == 0:
        return LayoutBuilder(0, c).build()
    score, cum = _scores(hist, c, max_pages, max_height)
    start, keys, parent, slot = build_within(
        score, cum, hist.score_order, c, max_pages, max_height, tries, fill_first, float(hot_share)
    )
    return Layout("btree", hist.n, c, start, keys, parent, slot)


def _scores(hist: Histogram, c: int, max_pages: int, max_height: int) -> tuple[np.ndarray, np.ndarray]:
    """The compiled builders' inputs (key scores and their running sum), once the budget is
    known to admit a tree (module docstring)."""
    if max_pages < fewest_pages(hist.n, c) or max_height < min_height(hist.n, c):
        raise ValueError("budget below the minimum: the caller checks this")
    return hist.key_score, hist.score_prefix


# (tries, fill_first, hot_share, carve): the plain construction's variants, then pages carved
# beside the hottest quarter, half and three quarters of the root's slots
PILOT_VARIANTS = (
    (2, False, 1.0, 0),
    (4, False, 1.0, 0),
    (2, True, 1.0, 0),
    (2, False, 0.25, 0),
    (1, False, 1.0, 0),
    (2, False, 0.5, 0),
    (0, False, 0.25, 1),
    (0, False, 0.5, 1),
    (0, False, 0.75, 1),
)


PILOT_MAX_KEYS = 300_000  # measured once (Zipf 1.0): about 0.4 s at 200,000 keys, 1-5 s at a million


def pilot_layout(hist: Histogram, c: int, max_pages: int, max_height: int, levels: int) -> Layout:
    """:func:`within_budget_layout` with the pages of the top ``levels`` levels chosen by trial
    (the pilot method of Duin & Voss, "The pilot method", Networks 34, 1999): each variant of the
    root page (``PILOT_VARIANTS``) is completed below by the plain construction, each child by
    its cheapest variant, and the page with the cheapest completion is kept. It costs about
    (variants^2 x levels) plain constructions; with ``levels`` = ``max_height`` it never costs
    more than any plain (non-carving) variant's whole tree (tested)."""
    if hist.n == 0:
        return LayoutBuilder(0, c).build()
    score, cum = _scores(hist, c, max_pages, max_height)
    variants = np.array(PILOT_VARIANTS, dtype=np.float64)
    start, keys, parent, slot = build_pilot(
        score, cum, hist.score_order, hist.p, hist.q, c, max_pages, max_height, variants, levels
    )
    return Layout("btree", hist.n, c, start, keys, parent, slot)


def within_budget_layout_plain(
    hist: Histogram,
    c: int,
    max_pages: int,
    max_height: int,
    tries: int = 2,
    fill_first: bool = False,
    hot_share: float = 1.0,
) -> Layout:
    """The plain reference of :func:`within_budget_layout` (compiled in
    :mod:`advisor.optimize.within_build`; the tests check both build the same layout)."""
    n = hist.n
    b = LayoutBuilder(n, c)
    if n == 0:
        return b.build()
    score = hist.key_score
    cum = np.concatenate([[0.0], np.cumsum(score)])
    todo = deque([(0, n, max_height, max_pages, -1, -1)])
    while todo:
        lo, hi, h, budget, parent, slot = todo.popleft()
        if hi - lo <= c:
            b.add(np.arange(lo, hi), parent, slot)
            continue
        keys = np.asarray(_root_page(score, lo, hi, c, h, budget, tries, fill_first, hot_share), dtype=np.int64)
        page = b.add(keys, parent, slot)
        starts = np.concatenate([[lo], keys + 1])  # child run t is keys starts[t]..ends[t]-1
        ends = np.concatenate([keys, [hi]])
        need_arr = -(-(ends - starts) // c)
        need = need_arr.tolist()
        slack = budget - 1 - int(need_arr.sum())
        share = share_spare(slack, (cum[ends] - cum[starts]).tolist(), need)
        for t in np.nonzero(ends > starts)[0].tolist():
            todo.append((int(starts[t]), int(ends[t]), h - 1, need[t] + share[t], page, t))
    return b.build()


def share_spare(slack: int, weights: list[float], need: list[int], least_useful: int = 2) -> list[int]:
    """Spare pages for each child run, in proportion to its lookup weight (whole pages); runs
    needing fewer than ``least_useful`` pages get none (they cannot use more)."""
    out = [0] * len(weights)
    usable = [k >= least_useful for k in need]
    total = sum(w for w, ok in zip(weights, usable, strict=True) if ok)
    if slack <= 0 or total <= 0:
        return out
    for t, (w, ok) in enumerate(zip(weights, usable, strict=True)):
        if ok:
            out[t] = int(slack * w / total)
    left = slack - sum(out)
    for t in sorted(range(len(weights)), key=lambda t: -weights[t]):
        if left <= 0:
            break
        if usable[t]:
            out[t] += 1
            left -= 1
    return out


class _RootState:
    """Running totals of a root page's gaps, so offering one more key costs O(c) numpy work
    instead of a pass over every gap: cut count, pages below, and remainders by size."""

    def __init__(self, size: int, c: int, sub: int) -> None:
        self.c, self.sub = c, sub
        self.gaps = [size]
        self.cuts = self._cuts(size)
        self.pages = self._pages(size)
        self.count = np.zeros(c + 1, dtype=np.int64)  # count[r]: runs that save a page for r keys
        self._tally(size, +1)

    def _cuts(self, g: int) -> int:
        return -(-(g + 1) // (self.sub + 1)) - 1 if g > 0 else 0

    def _pages(self, g: int) -> int:
        return -(-(g - self._cuts(g)) // self.c)

    def _tally(self, g: int, sign: int, count: np.ndarray | None = None) -> None:
        x = g - self._cuts(g)
        if x > 0:
            (self.count if count is None else count)[x % self.c or self.c] += sign

    def pages_if(self, i: int, left: int, right: int, room: int) -> int | None:
        """Pages below the root if gap i became gaps ``left`` and ``right`` with ``room`` root
        slots left for cuts and moved keys; None when the cuts do not fit."""
        g = self.gaps[i]
        cuts = self.cuts - self._cuts(g) + self._cuts(left) + self._cuts(right)
        spare = room - cuts
        if spare < 0:
            return None
        pages = self.pages - self._pages(g) + self._pages(left) + self._pages(right)
        count = self.count.copy()
        self._tally(g, -1, count)
        self._tally(left, +1, count)
        self._tally(right, +1, count)
        return pages - _pages_saved(count, spare)

    def split(self, i: int, left: int, right: int) -> None:
        g = self.gaps[i]
        self.cuts += self._cuts(left) + self._cuts(right) - self._cuts(g)
        self.pages += self._pages(left) + self._pages(right) - self._pages(g)
        self._tally(g, -1)
        self._tally(left, +1)
        self._tally(right, +1)
        self.gaps[i : i + 1] = [left, right]


def _pages_saved(count: np.ndarray, spare: int) -> int:
    """Most runs whose remainders fit in ``spare`` slots, smallest remainders first."""
    r = np.arange(count.size)
    cost = np.cumsum(r * count)
    full = int(np.searchsorted(cost, spare, side="right"))  # buckets 0..full-1 taken whole
    saved = int(count[:full].sum())
    if full < count.size:
        saved += min(int(count[full]), (spare - (int(cost[full - 1]) if full else 0)) // max(full, 1))
    return saved


def choose_plain(local: np.ndarray, order: np.ndarray, size: int, c: int, sub: int, budget: int) -> np.ndarray:
    """Hot keys a root page keeps (local ranks, ascending): the plain reference of the compiled
    :func:`advisor.optimize.within_kernel.choose_root_keys` (tests check they agree)."""
    chosen: list[int] = []
    state = _RootState(size, c, sub)
    for x in order.tolist():
        if len(chosen) >= c or local[x] <= 0:
            break
        i = bisect.bisect_left(chosen, x)
        left_edge = chosen[i - 1] if i > 0 else -1
        right_edge = chosen[i] if i < len(chosen) else size
        left, right = x - left_edge - 1, right_edge - x - 1
        pages = state.pages_if(i, left, right, c - len(chosen) - 1)
        if pages is None or pages + 1 > budget:
            continue
        chosen.insert(i, x)
        state.split(i, left, right)
    return np.array(chosen, dtype=np.int64)


def choose(local, order, size, c, sub, budget) -> np.ndarray:
    return choose_root_keys(
        np.ascontiguousarray(local, dtype=np.float64), np.ascontiguousarray(order, dtype=np.int64), size, c, sub, budget
    )


def _aligned_fillers(size: int, c: int, sub: int) -> np.ndarray:
    """Keys offered after the hot ones: evenly strided so that every run between them holds a
    whole number of pages (stride = m c + 1), the shape a full root over a range of
    near-uniform weight takes; they cost no page, so they fill root slots the hot keys left."""
    m = max(1, min(sub // c, (size - c) // ((c + 1) * c)))
    stride = m * c + 1
    return np.arange(stride - 1, size, stride, dtype=np.int64)[:c]


def _root_page(
    score: np.ndarray, lo: int, hi: int, c: int, h: int, budget: int, tries: int, fill_first=False, hot_share=1.0
):
    """Root keys of range lo..hi-1 (ascending global ranks)."""
    sub = min(capacity_of(c, h - 1), SATURATED)  # beyond any range: the same as unbounded
    size = hi - lo
    k = min(size, tries * c)
    local = score[lo:hi]
    top = np.argsort(-local, kind="stable")[:k]  # hottest first, ties by rank
    fill = _aligned_fillers(size, c, sub)
    fill = fill[~np.isin(fill, top)]
    hot = top[local[top] > 0]
    lc = np.concatenate([[0.0], np.cumsum(local)])
    if hot_share < 1.0 and size > 2 * c:
        first = int(hot_share * c)
        even = np.asarray(
            _cut_positions(lc, 0, size, min(c - first, size // (c + 1)), c, min(sub, size)), dtype=np.int64
        )
        even = even[(even >= 0) & (even < size)]
        offered = np.concatenate([hot[:first], even, hot[first:], fill])
        offered = offered[np.sort(np.unique(offered, return_index=True)[1])]  # first offer of each key
    else:
        offered = np.concatenate([fill, hot] if fill_first else [hot, fill])
    weights = local.copy()
    weights[offered] = np.maximum(weights[offered], np.finfo(np.float64).tiny)  # offered even when never looked up
    chosen = choose(weights, offered, size, c, min(sub, size + 1), budget)
    gaps = np.diff(np.concatenate([[-1], chosen, [size]])) - 1
    plan = _gap_plan(gaps, c, sub, c - chosen.size)
    if plan is None or plan[3] + 1 > budget:  # excluded by the invariant (module docstring)
        raise AssertionError("range not completable within its budget")
    cuts, moved, _used, _pages = plan
    keys: list[int] = chosen.tolist()
    starts = np.concatenate([[0], chosen + 1])  # gap t is keys starts[t]..starts[t]+gaps[t]-1
    for t in np.nonzero((moved > 0) | (cuts > 0))[0].tolist():
        a, g, r = int(starts[t]), int(gaps[t]), int(moved[t])
        # keys moved up come from the end of the run with more lookup weight (either end lies
        # next to a root key or the range's edge, so no new child run appears)
        left_end = lc[a + r] - lc[a] >= lc[a + g] - lc[a + g - r] if r else True
        keys += range(a, a + r) if left_end else range(a + g - r, a + g)
        if cuts[t]:
            keys += _cut_positions(lc, a + r if left_end else a, g - r, int(cuts[t]), c, sub)
    keys.sort()  # every gap's keys lie between its two root keys, so this is the page's order
    return [lo + x for x in keys]


def _cut_positions(lc: np.ndarray, first: int, length: int, cuts: int, c: int, sub: int) -> list[int]:
    """Where ``cuts`` keys split the run first..first+length-1 into pieces of at most ``sub``
    keys, every piece but the last a multiple of c (so the pieces need the fewest pages), each
    taking about an equal share of the run's remaining lookup weight: hot stretches end in small
    pieces (shallow subtrees), cold ones in large ones."""
    out: list[int] = []
    pos, keys_left, per = first, length - cuts, sub // c
    end = first + length
    for t in range(cuts):
        pieces_left = cuts + 1 - t
        m_lo = max(0, -(-(keys_left - (pieces_left - 1) * sub) // c))
        m_hi = min(per, keys_left // c)
        goal = lc[pos] + (lc[end] - lc[pos]) / pieces_left
        want = int(np.searchsorted(lc, goal, side="left")) - pos  # keys to reach the share
        m = min(max(int(round(want / c)), m_lo), m_hi)
        pos += m * c
        out.append(pos)
        pos += 1
        keys_left -= m * c
    return out
