"""The second end-of-search rule: a search that always ends in a leaf page.

The classic B-tree figures of this tool assume a search stops at the page holding the key (the
files ``advisor build`` writes search that way). Some engines' index seek never stops at an
interior match; this rule costs such an engine's real tree (the SQLite cross-check, and
``--current sqlite:...``).
"""

from __future__ import annotations

import numpy as np

from .histogram import Histogram
from .layout import Layout, end_pages, evaluate


def evaluate_leaf_search(layout: Layout, hist: Histogram) -> float:
    """Expected page reads under the other end-of-search rule: every search ends at a leaf.

    Some engines' index seek does not stop at an interior match (SQLite's compares a prefix of
    the stored record and always lands in a leaf), so a hit on a key held in an interior page
    costs the depth of the leaf holding its in-order predecessor (the right-most leaf of the
    subtree left of it), not the depth of its own page. Misses are costed as in
    :func:`evaluate`. The classic figures of this tool apply to engines whose search stops at the
    page holding the key (like the files ``advisor build`` writes); this rule is for costing an
    engine's real tree, e.g. in the SQLite cross-check.
    """
    if layout.structure != "btree" or hist.n == 0 or hist.total <= 0:
        return evaluate(layout, hist).expected_page_reads
    depth = layout.depths()
    key_page, gap_page = end_pages(layout)
    inner = np.zeros(layout.pages, dtype=bool)
    inner[layout.parent[1:]] = True
    target = np.arange(hist.n)
    for _ in range(hist.n):
        move = inner[key_page[target]] & (target > 0)
        if not move.any():
            break
        target[move] -= 1
    key_depth = depth[key_page[target]]
    return float((hist.p @ key_depth + hist.q @ depth[gap_page]) / hist.total)
