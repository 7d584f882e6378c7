"""The weight-oblivious baselines: a minimum-height B-tree (and B+-tree, :func:`uniform_bplus`)
with keys split evenly by count.

Definition (what a bulk loader of sorted keys builds, ignoring access frequencies): a
range of N keys with height budget h (the least h with (c+1)^h - 1 >= N) is one page when
N <= c; otherwise its root page holds m - 1 keys, where m = ceil((N + 1) / (c+1)^(h-1)) is
the fewest children of height h - 1 that can hold the rest, and the remaining N - m + 1 keys
are split into m consecutive runs whose sizes differ by at most one, the root's keys sitting
between the runs. Every leaf is at depth h or h - 1 and no page is emptier than it must be.
"""

from __future__ import annotations

from collections import deque

import numpy as np

from ..layout import Layout, LayoutBuilder
from .topdown import build_top_down


def reach(h: int, c: int, leaf_keys: int | None = None) -> int:
    """Most keys a B-tree of h levels holds when a leaf holds ``leaf_keys`` (default c) and a
    page above holds c keys and c + 1 children: reach(1) = leaf_keys, reach(h) = (c + 1)
    (reach(h - 1) + 1) - 1; (c+1)^h - 1 when leaf_keys = c."""
    r = 0
    for level in range(1, h + 1):
        r = (c if leaf_keys is None else leaf_keys) if level == 1 else (r + 1) * (c + 1) - 1
    return r


def min_height(n: int, c: int, leaf_keys: int | None = None) -> int:
    """Fewest levels a B-tree needs for n keys: least h with reach(h) >= n."""
    h = 0
    while reach(h, c, leaf_keys) < n:
        h += 1
    return h


def uniform_layout(n: int, c: int, leaf_keys: int | None = None, internal_keys: int | None = None) -> Layout:
    """Build the even-split minimum-height layout of n keys with capacity c. O(n).

    A bulk loader's fill factor: leaves hold at most ``leaf_keys`` keys and the pages above at
    most ``internal_keys`` (both default c); the layout's capacity stays c (the page's slots)."""
    leaf = c if leaf_keys is None else max(1, min(c, leaf_keys))
    inner = c if internal_keys is None else max(1, min(c, internal_keys))

    def even(lo: int, hi: int, _state) -> tuple[np.ndarray, None]:
        size = hi - lo
        sub = reach(min_height(size, inner, leaf) - 1, inner, leaf) + 1  # a child of height h-1 holds sub - 1 keys
        m = -(-(size + 1) // sub)
        rest = size - (m - 1)
        runs = np.full(m, rest // m, dtype=np.int64)
        runs[: rest % m] += 1
        # root key after run t sits at lo + sum(runs[:t+1]) + t
        return (lo + np.cumsum(runs) + np.arange(m))[:-1], None

    return build_top_down(n, c, even, leaf_keys=leaf)


def leaf_count(n: int, L: int) -> int:
    return -(-n // L)


def bplus_height(n: int, L: int, F: int) -> int:
    """Pages per lookup of the uniform B+-tree: 1 + ceil(log_F(ceil(n / L))), 0 for no keys."""
    if n == 0:
        return 0
    leaves, h = leaf_count(n, L), 1
    reach = 1
    while reach < leaves:
        reach *= F
        h += 1
    return h


def uniform_bplus(n: int, L: int, F: int, leaf_keys: int | None = None, children: int | None = None) -> Layout:
    """Leaves filled left to right with L keys (the last takes the rest), all at the minimum
    height, internal pages splitting their leaves evenly with the fewest children that keep
    every leaf at that depth (each internal page needs 2..F children; with F = 2 and a leaf
    count that is not a power of two some leaves must sit one level higher).

    A bulk loader's fill factor: leaves of ``leaf_keys`` keys and internal pages of at most
    ``children`` children (defaults L and F); the layout's capacities stay L and F."""
    b = LayoutBuilder(n, L, "bplus", F)
    if n == 0:
        return b.build()
    L = max(1, min(L, leaf_keys or L))
    F = max(2, min(F, children or F))
    leaves = leaf_count(n, L)
    todo = deque([(0, leaves, -1, -1, bplus_height(leaves * L, L, F))])
    while todo:
        lo, hi, parent, slot, height = todo.popleft()  # leaf indices lo..hi-1, levels wanted
        count = hi - lo
        if count == 1:
            b.add(np.arange(lo * L, min(n, (lo + 1) * L)), parent, slot, leaf=True)
            continue
        height = max(2, min(height, bplus_height(count * L, L, F) + 1))
        low, high = 2 ** (height - 2), F ** (height - 2)  # leaves a child of height-1 levels may hold
        m = max(2, -(-count // high))
        if count // m < low:  # cannot keep every leaf at this depth: use the child's own height
            height = bplus_height(count * L, L, F)
            m = max(2, -(-count // F ** (height - 2)))
        runs = np.full(m, count // m, dtype=np.int64)
        runs[: count % m] += 1
        edges = lo + np.concatenate([[0], np.cumsum(runs)])
        seps = edges[1:-1] * L
        page = b.add(seps, parent, slot, leaf=False)
        for t in range(m):
            todo.append((int(edges[t]), int(edges[t + 1]), page, t, height - 1))
    return b.build()
