"""The weight-oblivious baseline: a minimum-height B-tree with keys split evenly by count.

Definition (what a bulk loader of sorted keys builds, ignoring access frequencies): a
range of N keys with height budget h (the least h with (c+1)^h - 1 >= N) is one page when
N <= c; otherwise its root page holds m - 1 keys, where m = ceil((N + 1) / (c+1)^(h-1)) is
the fewest children of height h - 1 that can hold the rest, and the remaining N - m + 1 keys
are split into m consecutive runs whose sizes differ by at most one, the root's keys sitting
between the runs. Every leaf is at depth h or h - 1 and no page is emptier than it must be.
"""

from __future__ import annotations

import numpy as np

from ..layout import Layout
from .topdown import build_top_down


def min_height(n: int, c: int, leaf_keys: int | None = None) -> int:
    """Fewest levels a B-tree needs for n keys: least h with reach(h) >= n, where a leaf holds
    ``leaf_keys`` (default c) and a page above holds c keys and c + 1 children:
    reach(1) = leaf_keys, reach(h) = (c + 1) reach(h - 1) + c; (c+1)^h - 1 when leaf_keys = c."""
    leaf = c if leaf_keys is None else leaf_keys
    h, reach = 0, 0
    while reach < n:
        h += 1
        reach = leaf if h == 1 else (reach + 1) * (c + 1) - 1
    return h


def uniform_layout(n: int, c: int, leaf_keys: int | None = None, internal_keys: int | None = None) -> Layout:
    """Build the even-split minimum-height layout of n keys with capacity c. O(n).

    A bulk loader's fill factor: leaves hold at most ``leaf_keys`` keys and the pages above at
    most ``internal_keys`` (both default c); the layout's capacity stays c (the page's slots)."""
    leaf = c if leaf_keys is None else max(1, min(c, leaf_keys))
    inner = c if internal_keys is None else max(1, min(c, internal_keys))

    def reach(h: int) -> int:
        r = 0
        for level in range(1, h + 1):
            r = leaf if level == 1 else (r + 1) * (inner + 1) - 1
        return r

    def even(lo: int, hi: int, _state) -> tuple[np.ndarray, None]:
        size = hi - lo
        sub = reach(min_height(size, inner, leaf) - 1) + 1  # a child of height h-1 holds sub - 1 keys
        m = -(-(size + 1) // sub)
        rest = size - (m - 1)
        runs = np.full(m, rest // m, dtype=np.int64)
        runs[: rest % m] += 1
        # root key after run t sits at lo + sum(runs[:t+1]) + t
        return (lo + np.cumsum(runs) + np.arange(m))[:-1], None

    return build_top_down(n, c, even, leaf_keys=leaf)
