"""The one top-down builder every classic B-tree construction shares.

A construction only says which keys a range's page holds; this walks the ranges breadth-first
(parents before children), makes every range of at most c keys a leaf page, and hangs each
non-empty run between page keys in its child slot.
"""

from __future__ import annotations

from collections import deque
from collections.abc import Callable
from typing import Any

import numpy as np

from ..layout import Layout, LayoutBuilder

RootChooser = Callable[[int, int, Any], tuple[np.ndarray, Any]]


def build_top_down(n: int, c: int, choose: RootChooser, state: Any = None, leaf_keys: int | None = None) -> Layout:
    """``choose(lo, hi, state)`` returns the ascending key ranks of the page over keys lo..hi-1
    (a range of more than ``leaf_keys`` keys, default c) and the state handed to its children."""
    leaf = c if leaf_keys is None else leaf_keys
    b = LayoutBuilder(n, c)
    if n == 0:
        return b.build()
    todo = deque([(0, n, -1, -1, state)])
    while todo:
        lo, hi, parent, slot, st = todo.popleft()
        if hi - lo <= leaf:
            b.add(np.arange(lo, hi), parent, slot)
            continue
        roots, child_state = choose(lo, hi, st)
        roots = np.asarray(roots, dtype=np.int64)
        page = b.add(roots, parent, slot)
        begins = np.concatenate([[lo], roots + 1])
        ends = np.concatenate([roots, [hi]])
        for t in range(roots.size + 1):
            if ends[t] > begins[t]:
                todo.append((int(begins[t]), int(ends[t]), page, t, child_state))
    return b.build()
