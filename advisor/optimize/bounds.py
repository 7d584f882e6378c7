"""Proven lower bounds on expected page reads of ANY classic B-tree of capacity c.

Each function returns a figure no layout can beat; the planner reports the largest.
"""

from __future__ import annotations

import numpy as np

from ..histogram import Histogram


def entropy_bound(hist: Histogram, c: int) -> float:
    """H(p, q) / log2(2c + 1), and at least 1 when anything is looked up.

    Proof: a page visit has at most 2c + 1 outcomes (one of <= c keys found, or one of c + 1
    child slots taken), and distinct results (keys and gaps) end at distinct outcome strings,
    none a prefix of another. By the Kraft inequality and Shannon's source coding theorem the
    expected string length, which is the number of page reads, is at least the entropy in
    base 2c + 1. Every lookup reads the root, hence the max with 1.
    """
    if hist.total <= 0 or hist.n == 0:
        return 0.0
    return max(1.0, hist.entropy_bits() / np.log2(2 * c + 1))


def level_capacity_bound(hist: Histogram, c: int) -> float:
    """Hottest keys packed into the shallowest levels, ignoring key order.

    Proof: depth d holds at most (c+1)^(d-1) pages, so at most c (c+1)^(d-1) keys. Sorting
    weights descending and giving the t-th heaviest the depth of level t under those
    capacities minimises sum w_k depth_k over all depth assignments with those level sizes,
    which includes every layout's. Misses: a miss in gap g costs the deeper of its two
    neighbouring keys' depths, which is at least any convex mix of the two, so moving a share
    alpha of q_g onto key g-1 and 1 - alpha onto key g (end gaps go whole to their only
    neighbour) gives per-key weights whose bound is valid. The best of alpha in {0, 1/2, 1}
    is returned.
    """
    n, total = hist.n, hist.total
    if n == 0 or total <= 0:
        return 0.0
    best = 0.0
    for alpha in (0.0, 0.5, 1.0):
        w = hist.p.copy()
        w[:-1] += alpha * hist.q[1:-1]  # gap g (1..n-1) share onto key g-1
        w[1:] += (1 - alpha) * hist.q[1:-1]  # and onto key g
        w[0] += hist.q[0]
        w[-1] += hist.q[-1]
        best = max(best, pack_levels(w, 1, c, c + 1) / total)
    return best


def pack_levels(w: np.ndarray, first_depth: int, first_size: int, growth: int) -> float:
    """min over level assignments of sum w * depth: ``first_size`` slots at ``first_depth``,
    each deeper level ``growth`` times the one above; the heaviest weights go shallowest."""
    ws = np.sort(w)[::-1]
    cum = np.concatenate([[0.0], np.cumsum(ws)])
    cost, start, d, size = 0.0, 0, first_depth, first_size
    while start < ws.size:
        end = min(ws.size, start + size)
        cost += d * (cum[end] - cum[start])
        start, d, size = end, d + 1, size * growth
    return float(cost)


def lower_bounds(hist: Histogram, c: int) -> dict[str, float]:
    """Every bound by name; the planner takes the max."""
    return {"entropy": entropy_bound(hist, c), "level_capacity": level_capacity_bound(hist, c)}
