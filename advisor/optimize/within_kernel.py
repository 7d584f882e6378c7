"""Compiled kernel of the budgeted root-page choice (:mod:`advisor.optimize.within`).

Offering a key to a root page asks: with this key, can the page still be completed within its
slots and page budget? The plain version (``within._RootState``) answers in O(c) numpy work per
key, a per-call overhead that dominated the planner (2 million calls on the demo). Here the same
arithmetic runs compiled, and the "spare slots save the most pages" greedy is a query on two
Fenwick trees (counts and summed remainders by remainder size), so each offer costs O(log c);
a trial offer reads the trees with its changes applied on the fly and only a kept key updates
them. The tests check it against the plain version; ``benchmarks/bench_kernels.py`` measures both.
"""

from __future__ import annotations

import numpy as np
from numba import njit


@njit(cache=True)
def argsort_stable(a):
    """Indices that sort ``a`` ascending, ties in index order (merge sort on plain loops).

    numpy's sorts compiled by numba cost 1.3-1.7 s of compile time per type; these kernels need
    small sorts of several types, and this one compiles in a fraction of that."""
    n = a.shape[0]
    idx = np.arange(n)
    run = 16
    for s in range(0, n, run):  # insertion sort of short runs
        e = min(s + run, n)
        for i in range(s + 1, e):
            v = idx[i]
            j = i - 1
            while j >= s and a[idx[j]] > a[v]:
                idx[j + 1] = idx[j]
                j -= 1
            idx[j + 1] = v
    tmp = np.empty(n, dtype=np.int64)
    width = run
    while width < n:
        for lo in range(0, n, 2 * width):
            mid, hi = min(lo + width, n), min(lo + 2 * width, n)
            i, j, k = lo, mid, lo
            while i < mid and j < hi:
                if a[idx[j]] < a[idx[i]]:
                    tmp[k] = idx[j]
                    j += 1
                else:
                    tmp[k] = idx[i]
                    i += 1
                k += 1
            while i < mid:
                tmp[k] = idx[i]
                i += 1
                k += 1
            while j < hi:
                tmp[k] = idx[j]
                j += 1
                k += 1
        idx, tmp = tmp, idx
        width *= 2
    return idx


@njit(cache=True)
def sorted_copy(a):
    return a[argsort_stable(a)]


@njit(cache=True)
def _cuts(g, sub):
    if g <= sub:
        return 0  # fits below one slot (also g <= 0)
    return (g + 1 + sub) // (sub + 1) - 1


@njit(cache=True)
def _pages(g, c, sub):
    x = g - _cuts(g, sub)
    return (x + c - 1) // c


@njit(cache=True)
def _rem(g, c, sub):
    """Keys to move up to save one page of run g (0: the run needs no page)."""
    x = g - _cuts(g, sub)
    if x <= 0:
        return 0
    r = x % c
    return r if r else c


@njit(cache=True)
def _add(tree, i, v):
    n = tree.shape[0]
    while i < n:
        tree[i] += v
        i += i & (-i)


@njit(cache=True)
def _saved_if(cnt_tree, cost_tree, count, spare, top_bit, r1, s1, r2, s2, r3, s3):
    """:func:`_saved` as if remainders r1, r2, r3 (0: none) were added s1, s2, s3 times (+1 or
    -1), without touching the trees: each Fenwick node read in the descent is corrected by the
    changes that fall in the range it covers. A rejected offer then costs no tree update."""
    n = cost_tree.shape[0]
    pos, used, taken = 0, 0, 0
    step = top_bit
    while step:
        nxt = pos + step
        if nxt < n:
            cost, cnt = cost_tree[nxt], cnt_tree[nxt]
            if pos < r1 <= nxt:
                cost += s1 * r1
                cnt += s1
            if pos < r2 <= nxt:
                cost += s2 * r2
                cnt += s2
            if pos < r3 <= nxt:
                cost += s3 * r3
                cnt += s3
            if used + cost <= spare:
                pos = nxt
                used += cost
                taken += cnt
        step >>= 1
    r = pos + 1  # the first remainder size not taken whole
    if r < n:
        left = count[r]
        if r1 == r:
            left += s1
        if r2 == r:
            left += s2
        if r3 == r:
            left += s3
        if left > 0:
            taken += min(left, (spare - used) // r)
    return taken


@njit(cache=True)
def _tally(cnt_tree, cost_tree, count, g, c, sub, sign):
    r = _rem(g, c, sub)
    if r:
        count[r] += sign
        _add(cnt_tree, r, sign)
        _add(cost_tree, r, sign * r)


@njit(cache=True)
def choose_root_keys(local, order, size, c, sub, budget):
    """Local ranks (ascending) of the hot keys a root page over ``size`` keys keeps, offered in
    ``order`` up to the first key of no lookup weight; ``sub`` = keys a child subtree holds (at
    most size + 1), ``budget`` = pages."""
    stop = 0
    while stop < order.shape[0] and local[order[stop]] > 0:
        stop += 1
    return choose_offered(order[:stop], size, c, sub, budget)


@njit(cache=True)
def _kth(tree, k, top_bit):
    """Smallest position p with prefix count(p) >= k (Fenwick descent)."""
    pos = 0
    step = top_bit
    while step:
        nxt = pos + step
        if nxt < tree.shape[0] and tree[nxt] < k:
            pos = nxt
            k -= tree[nxt]
        step >>= 1
    return pos + 1


@njit(cache=True)
def _prefix(tree, i):
    s = 0
    while i > 0:
        s += tree[i]
        i -= i & (-i)
    return s


@njit(cache=True)
def choose_offered(order, size, c, sub, budget):
    """:func:`choose_root_keys` with every key of ``order`` (distinct keys) offered.

    A key's neighbours among those kept are found on a Fenwick tree over the offered keys in
    key order (O(log m) per offer): a sorted array of kept keys would shift O(c) entries per
    insert, O(c^2) per page, the larger cost at large c."""
    m = order.shape[0]
    by_key = argsort_stable(order)
    sorted_keys = order[by_key]
    where = np.empty(m, dtype=np.int64)  # offer t's position (1-based) in key order
    for j in range(m):
        where[by_key[j]] = j + 1
    kept = np.zeros(m + 1, dtype=np.int64)
    kept_top = 1
    while kept_top * 2 <= m:
        kept_top *= 2
    chosen = np.empty(c, dtype=np.int64)
    count = np.zeros(c + 1, dtype=np.int64)
    cnt_tree = np.zeros(c + 1, dtype=np.int64)
    cost_tree = np.zeros(c + 1, dtype=np.int64)
    top_bit = 1
    while top_bit * 2 <= c:
        top_bit *= 2
    nch = 0
    cuts = _cuts(size, sub)
    pages = _pages(size, c, sub)
    _tally(cnt_tree, cost_tree, count, size, c, sub, 1)
    for t in range(m):
        if nch >= c:
            break
        x = order[t]
        px = where[t]
        i = _prefix(kept, px - 1)  # kept keys below x
        left_edge = sorted_keys[_kth(kept, i, kept_top) - 1] if i > 0 else -1
        right_edge = sorted_keys[_kth(kept, i + 1, kept_top) - 1] if i < nch else size
        left = x - left_edge - 1
        right = right_edge - x - 1
        g = right_edge - left_edge - 1
        new_cuts = cuts - _cuts(g, sub) + _cuts(left, sub) + _cuts(right, sub)
        spare = (c - nch - 1) - new_cuts
        if spare < 0:
            continue
        new_pages = pages - _pages(g, c, sub) + _pages(left, c, sub) + _pages(right, c, sub)
        fits = new_pages + 1 <= budget  # fits even before spare slots save any page
        if not fits:
            rg, rl, rr = _rem(g, c, sub), _rem(left, c, sub), _rem(right, c, sub)
            saved = _saved_if(cnt_tree, cost_tree, count, spare, top_bit, rg, -1, rl, 1, rr, 1)
            fits = new_pages - saved + 1 <= budget
        if fits:
            _tally(cnt_tree, cost_tree, count, g, c, sub, -1)
            _tally(cnt_tree, cost_tree, count, left, c, sub, 1)
            _tally(cnt_tree, cost_tree, count, right, c, sub, 1)
            _add(kept, px, 1)
            chosen[nch] = x
            nch += 1
            cuts, pages = new_cuts, new_pages
    return sorted_copy(chosen[:nch])
