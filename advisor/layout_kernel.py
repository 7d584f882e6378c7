"""Compiled passes of the evaluator (:func:`advisor.layout.evaluate`) over a layout's flat arrays.

Every plan costs each candidate layout, a dozen per page size and frontier point; in numpy each
cost took about ten passes over n-sized arrays with int64 temporaries (40 ms at a million keys).
Here the same rules take two passes: pages' depths from parent links (parents precede
children, which :func:`advisor.layout.check_layout` enforces), then every key's and gap's end
page and depth, and the weight answered at each depth. The tests compare the evaluator with
page-by-page search replays; ``benchmarks/bench_kernels.py`` times both versions.
"""

from __future__ import annotations

import numpy as np
from numba import njit


@njit(cache=True, nogil=True)
def ordered_depths(parent):
    """Depth of every page (root = 1) when every parent precedes its children; an empty array
    when one does not (the caller then relaxes depths level by level)."""
    pages = parent.shape[0]
    depth = np.empty(pages, dtype=np.int64)
    for i in range(pages):
        up = parent[i]
        if up < 0:
            depth[i] = 1
        elif up < i:
            depth[i] = depth[up] + 1
        else:
            return np.empty(0, dtype=np.int64)
    return depth


@njit(cache=True, nogil=True)
def end_pages_kernel(page_start, page_keys, n, bplus, leaf, depth, key_page, gap_page):
    """Fill key_page (n) and gap_page (n + 1): where each hit and each miss stops (the rules of
    :func:`advisor.layout.end_pages`)."""
    for i in range(page_start.shape[0] - 1):
        if bplus and not leaf[i]:
            continue  # an internal B+ page lists separators, not its keys
        for j in range(page_start[i], page_start[i + 1]):
            key_page[page_keys[j]] = i
    if n == 0:
        gap_page[0] = 0
        return
    gap_page[0] = key_page[0]
    if bplus:
        for g in range(1, n + 1):
            gap_page[g] = key_page[g - 1]
        return
    gap_page[n] = key_page[n - 1]
    for g in range(1, n):
        a, b = key_page[g - 1], key_page[g]
        gap_page[g] = a if depth[a] >= depth[b] else b


@njit(cache=True, nogil=True)
def depths_and_weight(key_page, gap_page, depth, p, q, by_depth):
    """Add the lookup weight answered at each depth into ``by_depth``; returns the deepest end
    page of any key or gap (looked up or not)."""
    deepest = 0
    for k in range(key_page.shape[0]):
        d = depth[key_page[k]]
        deepest = max(deepest, d)
        by_depth[d] += p[k]
    for g in range(gap_page.shape[0]):
        d = depth[gap_page[g]]
        deepest = max(deepest, d)
        by_depth[d] += q[g]
    return deepest
