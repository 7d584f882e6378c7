"""The pilot construction (Duin & Voss, "The pilot method: a strategy for heuristic repetition
with application to the Steiner problem in graphs", Networks 34, 1999) over the budgeted builder.

At each page of the top levels, every variant of the plain construction's root page, and pages
that carve full pages out of the keys beside the hottest runs, are completed below by the plain
construction (each child by its cheapest variant); the page whose completion costs least is kept.
A variant's own page completed that way costs at most the variant's whole subtree, so by
induction the tree costs at most every plain variant's (``tests/test_budget.py`` checks it).
The trials call :func:`advisor.optimize.within_build.build_within`, never this module's builder:
numba's cache mishandles recursion between cached functions (the second run crashed).
"""

from __future__ import annotations

import numpy as np
from numba import njit

from .within_build import (
    build_within,
    capacity_saturated,
    children_of,
    finish_build,
    first_offers,
    local_cum,
    next_page,
    page_from_offers,
    place_page,
    root_page,
    split_ranked,
    start_build,
)
from .within_kernel import argsort_stable, sorted_copy


@njit(cache=True, nogil=True)
def build_pilot(score, cum, order, p, q, c, max_pages, max_height, variants, levels):
    """The construction with each page's keys chosen by trial (the pilot method): every root
    page variant in ``variants`` (rows of tries, fill_first, hot_share, carve; carve > 0: a
    :func:`carve_root_page` with share hot_share; the first row must not carve) is completed by the
    plain construction in each of those variants, per child the cheapest, and the page whose
    completion costs least is kept. Pages below the top ``levels`` use the first variant."""
    queue, bufs, write, page_start, page_keys, at = start_build(order, c, max_pages, max_height)
    tries, fill_first, hot_share = int(variants[0, 0]), variants[0, 1] > 0, variants[0, 2]
    while at[0] < at[1]:
        lo, hi, h, budget, page, mine = next_page(queue, bufs, write, page_start, page_keys, at, c)
        if hi - lo <= c:
            continue
        if max_height - h < levels:
            keys = _pilot_page(score, cum, mine, lo, hi, c, h, budget, p, q, variants)
        else:
            keys = root_page(score, mine, lo, hi, c, h, budget, tries, fill_first, hot_share)
        queue, page_start = place_page(queue, bufs, write, page_start, at, page, lo, hi, h, budget, mine, keys, c, cum)
        page_keys[page_start[page] : page_start[page + 1]] = keys
    return finish_build(queue, page_start, page_keys, at)


@njit(cache=True)
def _pilot_page(score, cum, mine, lo, hi, c, h, budget, p, q, variants):
    """The root keys of lo..hi-1 whose completion by the plain construction costs least."""
    best_keys = np.empty(0, dtype=np.int64)
    best = np.inf
    scratch = np.empty(hi - lo, dtype=mine.dtype)
    for v in range(variants.shape[0]):
        if variants[v, 3] > 0:
            keys = carve_root_page(score, mine, lo, hi, c, h, budget, variants[v, 2])
        else:
            tries, fill_first, hot_share = int(variants[v, 0]), variants[v, 1] > 0, variants[v, 2]
            keys = root_page(score, mine, lo, hi, c, h, budget, tries, fill_first, hot_share)
        if keys.shape[0] == best_keys.shape[0] and np.all(keys == best_keys):
            continue
        k_start, k_end, budgets = children_of(keys, lo, hi, c, budget, cum)
        first = split_ranked(mine, keys, k_start, k_end, scratch, 0)
        total = 0.0
        for t in range(keys.shape[0] + 1):
            a, z = k_start[t], k_end[t]
            if z - a <= 0:
                continue
            if z - a <= c:  # one page
                for k in range(a, z):
                    total += p[k] + q[k]
                total += q[z]
                continue
            sub_order = (scratch[first[t] : first[t] + z - a] - a).astype(mine.dtype)  # one compiled type
            cheapest = np.inf
            for b in range(variants.shape[0]):
                if variants[b, 3] > 0:
                    continue  # carving is tried at the pilot's own pages only
                tries, fill_first, hot_share = int(variants[b, 0]), variants[b, 1] > 0, variants[b, 2]
                st, ks, par, _ = build_within(
                    score[a:z], cum[a : z + 1], sub_order, c, budgets[t], h - 1, tries, fill_first, hot_share
                )
                cheapest = min(cheapest, subtree_cost(p[a:z], q[a : z + 1], st, ks, par))
            total += cheapest
            if total >= best:
                break
        if total < best:
            best, best_keys = total, keys
    return best_keys


@njit(cache=True)
def carve_root_page(score, ranked, lo, hi, c, h, budget, share):
    """Root keys of lo..hi-1 that carve full pages out of the keys beside the hottest ones.

    The hottest ``share`` x c keys are offered first; then, from each run of them outward, keys
    at strides of c + 1 (each such key leaves exactly one full page of c keys between it and the
    previous one: a hot neighbourhood gets pages of its own one level down instead of sharing a
    deep subtree), most valuable page first; then the other hot keys and the aligned fillers."""
    sub = capacity_saturated(c, h - 1)
    size = hi - lo
    lc = local_cum(score, lo, hi)
    k = min(size, 4 * c)
    n_hot = 0
    while n_hot < k and score[ranked[n_hot]] > 0:
        n_hot += 1
    first = min(max(1, int(share * c)), n_hot)
    held = sorted_copy(ranked[:first].astype(np.int64) - lo)
    runs = 1 if first > 0 else 0
    for i in range(1, first):
        if held[i] > held[i - 1] + 1:
            runs += 1
    per_run = max(1, c // max(runs, 1))
    cand = np.empty(2 * per_run * max(runs, 1), dtype=np.int64)
    value = np.empty(cand.shape[0])
    nc = 0
    i = 0
    while i < first:
        j = i
        while j + 1 < first and held[j + 1] == held[j] + 1:
            j += 1
        s0, e0 = held[i], held[j]
        for step in range(1, per_run + 1):
            x = e0 + step * (c + 1)
            if x >= size:
                break
            cand[nc], value[nc] = x, lc[x] - lc[x - c]
            nc += 1
        for step in range(1, per_run + 1):
            x = s0 - step * (c + 1)
            if x < 0:
                break
            cand[nc], value[nc] = x, lc[x + c + 1] - lc[x + 1]
            nc += 1
        i = j + 1
    by_key = argsort_stable(cand[:nc])
    by_value = by_key[argsort_stable(-value[:nc][by_key])]  # most valuable, ties by key
    m = max(1, min(sub // c, (size - c) // ((c + 1) * c)))
    stride = m * c + 1
    offered = np.empty(n_hot + nc + c, dtype=np.int64)
    count = 0
    for i in range(first):
        offered[count] = ranked[i] - lo
        count += 1
    for i in range(nc):
        offered[count] = cand[by_value[i]]
        count += 1
    for i in range(first, n_hot):
        offered[count] = ranked[i] - lo
        count += 1
    x = stride - 1
    for _ in range(c):
        if x >= size:
            break
        offered[count] = x
        count += 1
        x += stride
    return page_from_offers(lc, lo, size, c, sub, budget, first_offers(offered, count))


@njit(cache=True)
def subtree_cost(p, q, page_start, page_keys, parent):
    """Lookup weight x pages read over one subtree's keys and gaps (ranks local to it, its root at
    depth 1): the classic cost rule of :func:`advisor.layout.evaluate`, kept unnormalised."""
    pages = parent.shape[0]
    depth = np.empty(pages, dtype=np.int64)
    m = p.shape[0]
    kd = np.empty(m, dtype=np.int64)
    for i in range(pages):
        depth[i] = 1 if parent[i] < 0 else depth[parent[i]] + 1
        for j in range(page_start[i], page_start[i + 1]):
            kd[page_keys[j]] = depth[i]
    cost = q[0] * kd[0] + q[m] * kd[m - 1]
    for k in range(m):
        cost += p[k] * kd[k]
    for g in range(1, m):
        cost += q[g] * max(kd[g - 1], kd[g])
    return cost
