"""Range scans beside point lookups: pages per scan and the blended figure for both layouts.

The optimiser fits layouts to point lookups plus each scan's first probe counted as a lookup
(what a scan pays to find its start); scans are then costed exactly by ``scan_pages``: every
page holding a key of the range plus all their ancestors, each once.
"""

from __future__ import annotations

import numpy as np

from .histogram import Histogram
from .layout import Layout, end_pages, evaluate
from .planner import Plan
from .serialize import _count


def scan_figures(plan: Plan, points: Histogram, first: np.ndarray, last: np.ndarray, weight: np.ndarray) -> dict:
    """Point lookups, range scans and both together, page reads per operation, both layouts."""
    total_scans = float(weight.sum())
    out = {"scans": _count(total_scans), "point_lookups": _count(points.total)}
    for side, layout in (("uniform", plan.uniform), ("optimized", plan.recommended)):
        point = evaluate(layout, points).expected_page_reads if points.total > 0 else 0.0
        scan = float(weight @ scan_pages(layout, first, last) / total_scans) if total_scans > 0 else 0.0
        ops = points.total + total_scans
        both = (point * points.total + scan * total_scans) / ops if ops > 0 else 0.0
        out[side] = {"point_lookup_reads": point, "scan_pages": scan, "combined": both}
    return out


def scan_pages(layout: Layout, first: np.ndarray, last: np.ndarray) -> np.ndarray:
    """Pages a range scan touches, per scan over key ranks first..last (inclusive).

    B+-tree: the descent to the first key's leaf plus every further leaf of the range (the leaf
    chain), i.e. depth + leaves - 1. Classic B-tree:
    A scan descends to its first key and walks the keys in order; it reads every page holding a
    key of the range and every ancestor of those pages (to reach a child page its parent's
    pointer must be read), each page once. That includes the path to the first key. (Every
    page on that path holding no key of the range is an ancestor of the first key's page, but
    the converse fails: an ancestor whose own subtree starts inside the range is read too, so
    "path to the first key plus the pages holding its keys" would undercount.) A scan with no
    key in range (first > last) costs what a miss in gap ``first`` costs.
    """
    n = layout.n_keys
    out = np.zeros(first.size, dtype=np.int64)
    if n == 0 or first.size == 0:
        return out
    depth = layout.depths()
    key_page, gap_page = end_pages(layout)
    empty = first > last
    out[empty] = depth[gap_page[np.clip(first[empty], 0, n)]]
    if layout.structure == "bplus":
        # B+-tree: descend once to the first key's leaf, then follow the leaf chain
        full = ~empty
        a, b = first[full], last[full]
        leaf_start = np.concatenate([[1], (np.diff(key_page) != 0).astype(np.int64)])
        run = np.cumsum(leaf_start)  # leaf ordinal per key, leaves being consecutive runs
        out[full] = depth[key_page[a]] + (run[b] - run[a])
        return out
    parent = layout.parent
    for i in np.nonzero(~empty)[0]:
        level = np.unique(key_page[int(first[i]) : int(last[i]) + 1])
        seen = [level]
        while level.size:
            level = np.unique(parent[level])
            level = level[level >= 0]
            seen.append(level)
        out[i] = np.unique(np.concatenate(seen)).size
    return out
