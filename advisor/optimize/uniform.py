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


def min_height(n: int, c: int) -> int:
    """Fewest levels a B-tree of capacity c needs for n keys: least h with (c+1)^h - 1 >= n."""
    h, reach = 0, 0
    while reach < n:
        h += 1
        reach = (reach + 1) * (c + 1) - 1
    return h


def uniform_layout(n: int, c: int) -> Layout:
    """Build the even-split minimum-height layout of n keys with capacity c. O(n)."""

    def even(lo: int, hi: int, _state) -> tuple[np.ndarray, None]:
        size = hi - lo
        sub = (c + 1) ** (min_height(size, c) - 1)  # a child of height h-1 holds sub - 1 keys
        m = -(-(size + 1) // sub)
        rest = size - (m - 1)
        runs = np.full(m, rest // m, dtype=np.int64)
        runs[: rest % m] += 1
        # root key after run t sits at lo + sum(runs[:t+1]) + t
        return (lo + np.cumsum(runs) + np.arange(m))[:-1], None

    return build_top_down(n, c, even)
