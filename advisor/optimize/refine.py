"""Exact re-solves of subtrees that keep a layout within its page and height budget.

A subtree over keys lo..hi-1 costs the same wherever it hangs (every lookup in its range reads
its pages and nothing else of it), so replacing it by the best tree of that range within its
own page count plus any spare pages, and within the levels left below its depth, lowers the
layout's cost and keeps the whole within budget. The replacement is the price-per-page optimum
of :func:`advisor.optimize.constrained.solve_within`; it is taken only when it is cheaper.
Subtrees are visited top-down (largest first), each within a work cap.
"""

from __future__ import annotations

from collections import deque

import numpy as np

from ..histogram import Histogram
from ..layout import Layout, LayoutBuilder, page_traffic
from .constrained import EVALUATIONS, constrained_bytes, constrained_work, solve_within
from .near import subtree_ranges

MAX_BYTES = 1.0e9


def subtree_totals(layout: Layout, values: np.ndarray) -> np.ndarray:
    """Sum of ``values`` over every page's subtree (the page itself included)."""
    acc = values.astype(np.float64).copy()
    depth = layout.depths()
    for d in range(int(depth.max()) if depth.size else 0, 1, -1):
        at = np.nonzero(depth == d)[0]
        np.add.at(acc, layout.parent[at], acc[at])
    return acc


def polish_within(
    layout: Layout,
    hist: Histogram,
    max_pages: int | None,
    max_height: int | None,
    ops_budget: float = 3e8,
    max_subtree_ops: float = 1e8,
) -> Layout:
    """Re-solve the largest affordable subtrees exactly within the budget (classic B-tree)."""
    c, n = layout.capacity, layout.n_keys
    if layout.structure != "btree" or layout.pages <= 1 or hist.total <= 0:
        return layout
    lo, hi = subtree_ranges(layout)
    depth = layout.depths()
    cost = subtree_totals(layout, page_traffic(layout, hist))
    pages = subtree_totals(layout, np.ones(layout.pages))
    height_below = _heights(layout, depth)
    kids: dict[int, list[tuple[int, int]]] = {}
    for page in range(1, layout.pages):
        kids.setdefault(int(layout.parent[page]), []).append((int(layout.slot[page]), page))
    spare = None if max_pages is None else max_pages - layout.pages
    b = LayoutBuilder(n, c)
    spent = 0.0
    todo = deque([(0, -1, -1)])
    while todo:
        page, parent, slot = todo.popleft()
        size = int(hi[page] - lo[page] + 1)
        levels = (max_height - int(depth[page]) + 1) if max_height is not None else int(height_below[page]) + 1
        work = constrained_work(size, c, levels) * EVALUATIONS
        if (
            kids.get(page)
            and work <= max_subtree_ops
            and spent + work <= ops_budget
            and constrained_bytes(size, c, levels) <= MAX_BYTES
        ):
            spent += work
            a, z = int(lo[page]), int(hi[page]) + 1
            sub = Histogram(hist.p[a:z], hist.q[a : z + 1])
            allowance = None if spare is None else int(pages[page]) + spare
            res = solve_within(sub, c, allowance, levels)
            if res.expected_page_reads * sub.total < cost[page] * (1 - 1e-12):
                if spare is not None:
                    spare -= res.layout.pages - int(pages[page])
                _graft(b, res.layout, a, parent, slot)
                continue
        new = b.add(layout.keys_of(page), parent, slot)
        for s, child in sorted(kids.get(page, [])):
            todo.append((child, new, s))
    return b.build()


def _heights(layout: Layout, depth: np.ndarray) -> np.ndarray:
    """Levels of every page's subtree (1 for a leaf page)."""
    deepest = depth.copy()
    for d in range(int(depth.max()), 1, -1):
        at = np.nonzero(depth == d)[0]
        np.maximum.at(deepest, layout.parent[at], deepest[at])
    return deepest - depth + 1


def _graft(b: LayoutBuilder, sub: Layout, shift: int, parent: int, slot: int) -> None:
    ids: list[int] = []
    for k in range(sub.pages):
        par = int(sub.parent[k])
        ids.append(
            b.add(sub.keys_of(k) + shift, parent if par < 0 else ids[par], slot if par < 0 else int(sub.slot[k]))
        )
