"""The budgeted top-down construction of :mod:`advisor.optimize.within`, compiled whole.

The plain construction spends most of its time in per-page numpy calls (a top-k selection, a
cumulative sum, the gap plan, the cut positions: a dozen small calls per page, thousands of
pages per plan, a dozen plans per page size). Here one numba call builds the whole layout with
the same arithmetic in the same order, so the layouts are identical (the tests build both).

Two things differ in how, not what:

* the hottest keys of a range come from the histogram's key order by lookup score (one stable
  sort per histogram, :attr:`advisor.histogram.Histogram.score_order`), handed down level by
  level: each range's keys in that order are split stably among its children, O(n log c) per
  level, instead of a selection over every range;
* a key offered twice to a root is kept at its first offer by a sort, not by ``np.unique``.

Capacities (c + 1)^h - 1 are saturated at 2^40 keys: every use compares them with a range of
fewer keys, so a saturated value acts as "unbounded" exactly as the exact one does.
"""

from __future__ import annotations

import numpy as np
from numba import njit

from .within_kernel import argsort_stable, choose_offered, sorted_copy

SATURATED = 1 << 40


@njit(cache=True)
def capacity_saturated(c, h):
    """Most keys a classic B-tree of capacity c and height h holds, at most 2^40."""
    if h <= 0:
        return 0
    cap = 1
    for _ in range(h):
        cap *= c + 1
        if cap > SATURATED:
            return SATURATED
    return cap - 1


@njit(cache=True)
def _ceil_div(a, b):
    return -((-a) // b)


@njit(cache=True)
def cut_positions(lc, first, length, cuts, c, sub, out, k):
    """Write ``cuts`` cut keys into out[k:] (see :func:`advisor.optimize.within._cut_positions`);
    returns the new fill of ``out``."""
    pos, keys_left, per = first, length - cuts, sub // c
    end = first + length
    for t in range(cuts):
        pieces_left = cuts + 1 - t
        m_lo = max(0, _ceil_div(keys_left - (pieces_left - 1) * sub, c))
        m_hi = min(per, keys_left // c)
        goal = lc[pos] + (lc[end] - lc[pos]) / pieces_left
        want = np.searchsorted(lc, goal) - pos
        m = min(max(int(np.rint(want / c)), m_lo), m_hi)
        pos += m * c
        out[k] = pos
        k += 1
        pos += 1
        keys_left -= m * c
    return k


@njit(cache=True)
def share_spare_kernel(slack, weights, need, least_useful):
    """Compiled :func:`advisor.optimize.within.share_spare` (same rounding, same tie order)."""
    m = weights.shape[0]
    out = np.zeros(m, dtype=np.int64)
    total = 0.0
    for t in range(m):
        if need[t] >= least_useful:
            total += weights[t]
    if slack <= 0 or total <= 0:
        return out
    given = 0
    for t in range(m):
        if need[t] >= least_useful:
            out[t] = int(slack * weights[t] / total)
            given += out[t]
    left = slack - given
    order = argsort_stable(-weights)
    for i in range(m):
        if left <= 0:
            break
        t = order[i]
        if need[t] >= least_useful:
            out[t] += 1
            left -= 1
    return out


@njit(cache=True)
def first_offers(offered, count):
    """offered[:count] with repeats removed, each key kept at its first offer."""
    idx = argsort_stable(offered[:count])
    keep = np.ones(count, dtype=np.bool_)
    for i in range(1, count):
        if offered[idx[i]] == offered[idx[i - 1]]:
            keep[idx[i]] = False
    out = np.empty(count, dtype=np.int64)
    k = 0
    for i in range(count):
        if keep[i]:
            out[k] = offered[i]
            k += 1
    return out[:k]


@njit(cache=True)
def root_page(score, ranked, lo, hi, c, h, budget, tries, fill_first, hot_share):
    """Root keys (ascending global ranks) of range lo..hi-1; ``ranked`` holds the range's keys
    (global ranks) hottest first, ties by rank."""
    sub = capacity_saturated(c, h - 1)
    size = hi - lo
    k = min(size, tries * c)
    lc = local_cum(score, lo, hi)
    n_hot = 0
    while n_hot < k and score[ranked[n_hot]] > 0:
        n_hot += 1
    top_sorted = sorted_copy(ranked[:k].astype(np.int64) - lo)
    m = max(1, min(sub // c, (size - c) // ((c + 1) * c)))
    stride = m * c + 1
    fill = np.empty(c, dtype=np.int64)
    n_fill = 0
    x = stride - 1
    for _ in range(c):  # the first c strided keys, less those already offered as hot
        if x >= size:
            break
        j = np.searchsorted(top_sorted, x)
        if not (j < k and top_sorted[j] == x):
            fill[n_fill] = x
            n_fill += 1
        x += stride
    offered = np.empty(n_hot + n_fill + c + 1, dtype=np.int64)
    count = 0
    if hot_share < 1.0 and size > 2 * c:
        first = min(int(hot_share * c), n_hot)
        for i in range(first):
            offered[count] = ranked[i] - lo
            count += 1
        even = np.empty(c + 1, dtype=np.int64)
        n_even = cut_positions(lc, 0, size, min(c - int(hot_share * c), size // (c + 1)), c, min(sub, size), even, 0)
        for i in range(n_even):
            if 0 <= even[i] < size:
                offered[count] = even[i]
                count += 1
        for i in range(first, n_hot):
            offered[count] = ranked[i] - lo
            count += 1
        for i in range(n_fill):
            offered[count] = fill[i]
            count += 1
        offered = first_offers(offered, count)
    else:
        if fill_first:
            for i in range(n_fill):
                offered[count] = fill[i]
                count += 1
        for i in range(n_hot):
            offered[count] = ranked[i] - lo
            count += 1
        if not fill_first:
            for i in range(n_fill):
                offered[count] = fill[i]
                count += 1
        offered = offered[:count]
    return page_from_offers(lc, lo, size, c, sub, budget, offered)


@njit(cache=True)
def local_cum(score, lo, hi):
    """Cumulative lookup score of keys lo..hi-1 from 0 (the same sums as numpy's cumsum)."""
    lc = np.empty(hi - lo + 1)
    lc[0] = 0.0
    for i in range(hi - lo):
        lc[i + 1] = lc[i] + score[lo + i]
    return lc


@njit(cache=True)
def page_from_offers(lc, lo, size, c, sub, budget, offered):
    """The root page of keys lo..lo+size-1 from keys offered in order (local ranks): the ones
    kept while the page stays completable, then the cuts and moved keys of the gap plan."""
    chosen = choose_offered(offered, size, c, min(sub, size + 1), budget)
    nch = chosen.shape[0]
    # the gap plan (within._gap_plan): cuts per gap, then spare slots take remainders smallest first
    gaps = np.empty(nch + 1, dtype=np.int64)
    starts = np.empty(nch + 1, dtype=np.int64)
    prev = -1
    for t in range(nch + 1):
        nxt = chosen[t] if t < nch else size
        gaps[t] = nxt - prev - 1
        starts[t] = prev + 1
        prev = nxt
    cuts = np.zeros(nch + 1, dtype=np.int64)
    total_cuts = 0
    for t in range(nch + 1):
        if gaps[t] > 0:
            cuts[t] = _ceil_div(gaps[t] + 1, sub + 1) - 1
            total_cuts += cuts[t]
    spare = c - nch - total_cuts
    if spare < 0:
        raise AssertionError("range not completable within its budget")
    pages = 0
    n_runs = 0
    run_ids = np.empty(nch + 1, dtype=np.int64)
    rems = np.empty(nch + 1, dtype=np.int64)
    for t in range(nch + 1):
        left = gaps[t] - cuts[t]
        pages += _ceil_div(left, c)
        if left > 0:
            r = left % c
            run_ids[n_runs] = t
            rems[n_runs] = r if r else c
            n_runs += 1
    order = argsort_stable(rems[:n_runs])  # by remainder, ties by position
    moved = np.zeros(nch + 1, dtype=np.int64)
    used = 0
    taken = 0
    for i in range(n_runs):
        r = rems[order[i]]
        if used + r > spare:
            break
        used += r
        moved[run_ids[order[i]]] = r
        taken += 1
    if pages - taken + 1 > budget:
        raise AssertionError("range not completable within its budget")
    keys = np.empty(c, dtype=np.int64)
    nk = 0
    for i in range(nch):
        keys[nk] = chosen[i]
        nk += 1
    for t in range(nch + 1):
        r = moved[t]
        if r == 0 and cuts[t] == 0:
            continue
        a, g = starts[t], gaps[t]
        # keys moved up come from the end of the run with more lookup weight
        left_end = True
        if r:
            left_end = lc[a + r] - lc[a] >= lc[a + g] - lc[a + g - r]
        base = a if left_end else a + g - r
        for i in range(r):
            keys[nk] = base + i
            nk += 1
        if cuts[t]:
            nk = cut_positions(lc, a + r if left_end else a, g - r, cuts[t], c, sub, keys, nk)
    out = sorted_copy(keys[:nk])
    return out + lo


@njit(cache=True)
def _grown(a, size):
    out = np.empty(size, dtype=a.dtype)
    out[: a.shape[0]] = a
    return out


@njit(cache=True)
def children_of(keys, lo, hi, c, budget, cum):
    """Child runs of a page with ``keys`` over lo..hi-1 (start, end, page budget each): every run
    gets the fewest pages it needs, and the page's spare pages are shared by lookup weight."""
    nk = keys.shape[0]
    kids = nk + 1
    k_start = np.empty(kids, dtype=np.int64)
    k_end = np.empty(kids, dtype=np.int64)
    need = np.empty(kids, dtype=np.int64)
    weight = np.empty(kids)
    need_sum = 0
    for t in range(kids):
        k_start[t] = lo if t == 0 else keys[t - 1] + 1
        k_end[t] = keys[t] if t < nk else hi
        need[t] = _ceil_div(k_end[t] - k_start[t], c)
        need_sum += need[t]
        weight[t] = cum[k_end[t]] - cum[k_start[t]]
    share = share_spare_kernel(budget - 1 - need_sum, weight, need, 2)
    return k_start, k_end, need + share


@njit(cache=True)
def split_ranked(mine, keys, k_start, k_end, out, at):
    """Write the children's keys, each child's hottest first, from this range's ranked keys
    ``mine`` (a stable split) into out[at:], child after child; returns where each starts."""
    kids = keys.shape[0] + 1
    fill_at = np.empty(kids, dtype=np.int64)
    for t in range(kids):
        fill_at[t] = at
        at += k_end[t] - k_start[t]
    first = fill_at.copy()
    nk = keys.shape[0]
    for i in range(mine.shape[0]):
        x = mine[i]
        t = np.searchsorted(keys, x)
        if t < nk and keys[t] == x:
            continue
        out[fill_at[t]] = x
        fill_at[t] += 1
    return first


@njit(cache=True, nogil=True)
def build_within(score, cum, order, c, max_pages, max_height, tries, fill_first, hot_share):
    """The whole construction: (page_start, page_keys, parent, slot), pages in breadth-first
    order as :func:`advisor.optimize.within.within_budget_layout` adds them. Releases the GIL,
    so the planner builds several candidates at once."""
    queue, bufs, write, page_start, page_keys, at = start_build(order, c, max_pages, max_height)
    while at[0] < at[1]:
        lo, hi, h, budget, page, mine = next_page(queue, bufs, write, page_start, page_keys, at, c)
        if hi - lo > c:
            keys = root_page(score, mine, lo, hi, c, h, budget, tries, fill_first, hot_share)
            queue, page_start = place_page(
                queue, bufs, write, page_start, at, page, lo, hi, h, budget, mine, keys, c, cum
            )
            page_keys[page_start[page] : page_start[page + 1]] = keys
    return finish_build(queue, page_start, page_keys, at)


@njit(cache=True)
def start_build(order, c, max_pages, max_height):
    """The construction's state: a queue of ranges (one per page, breadth-first), each level's
    ranked keys, the pages built, and counters ``at`` = (next page, pages queued, level)."""
    n = order.shape[0]
    room = min(n, max_pages, 2 * ((n + c - 1) // c) + 16)  # pages; grown when a loose budget needs more
    queue = np.empty((7, room), dtype=np.int64)  # per page: lo, hi, h, budget, parent, slot, offset
    bufs = np.empty((2, n), dtype=order.dtype)  # each level's ranges' keys, hottest first
    bufs[max_height % 2, :] = order
    write = np.zeros(2, dtype=np.int64)
    page_start = np.zeros(room + 1, dtype=np.int64)
    page_keys = np.empty(n, dtype=order.dtype)  # ranks in the narrowest exact type (int32 below 2^31 keys)
    queue[0, 0], queue[1, 0], queue[2, 0], queue[3, 0] = 0, n, max_height, max_pages
    queue[4, 0], queue[5, 0], queue[6, 0] = -1, -1, 0
    at = np.array([0, 1, max_height], dtype=np.int64)
    return queue, bufs, write, page_start, page_keys, at


@njit(cache=True)
def next_page(queue, bufs, write, page_start, page_keys, at, c):
    """Take the next range off the queue; a range of at most c keys is written as one page."""
    page = at[0]
    lo, hi, h, budget = queue[0, page], queue[1, page], queue[2, page], queue[3, page]
    at[0] += 1
    if h < at[2]:  # a new level: the buffer of the level below it is free again
        at[2] = h
        write[(h - 1) % 2] = 0
    start = page_start[page]
    if hi - lo <= c:
        for i in range(hi - lo):
            page_keys[start + i] = lo + i
        page_start[page + 1] = start + hi - lo
    mine = bufs[h % 2, queue[6, page] : queue[6, page] + hi - lo]
    return lo, hi, h, budget, page, mine


@njit(cache=True)
def place_page(queue, bufs, write, page_start, at, page, lo, hi, h, budget, mine, keys, c, cum):
    """Record a page's key count and queue its child runs with their budgets and ranked keys."""
    nk = keys.shape[0]
    k_start, k_end, budgets = children_of(keys, lo, hi, c, budget, cum)
    kids = nk + 1
    tail = at[1]
    if tail + kids > queue.shape[1]:
        room = min(bufs.shape[1], max(2 * queue.shape[1], tail + kids))
        grown = np.empty((7, room), dtype=np.int64)
        grown[:, : queue.shape[1]] = queue
        queue = grown
        page_start = _grown(page_start, room + 1)
    page_start[page + 1] = page_start[page] + nk
    below = (h - 1) % 2
    # children of a two-level page are leaves (a height-1 run holds at most c keys): they are
    # written without a root choice, so their keys are not ranked for them
    first = split_ranked(mine, keys, k_start, k_end, bufs[below], write[below]) if h > 2 else k_start
    for t in range(kids):
        if k_end[t] > k_start[t]:
            queue[0, tail], queue[1, tail], queue[2, tail], queue[3, tail] = k_start[t], k_end[t], h - 1, budgets[t]
            queue[4, tail], queue[5, tail], queue[6, tail] = page, t, first[t]
            tail += 1
    at[1] = tail
    write[below] += hi - lo - nk
    return queue, page_start


@njit(cache=True)
def finish_build(queue, page_start, page_keys, at):
    pages = at[0]
    return page_start[: pages + 1].copy(), page_keys, queue[4, :pages].copy(), queue[5, :pages].copy()
