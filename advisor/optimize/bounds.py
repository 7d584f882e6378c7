"""Proven lower bounds on expected page reads of ANY classic B-tree of capacity c.

Each function returns a figure no layout can beat; the planner reports the largest.
"""

from __future__ import annotations

import numpy as np

from ..histogram import Histogram
from .runs_kernel import runs_upper


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
    return max(pack_sorted(sorted_key_weights(hist, alpha), 1, c, c + 1) / total for alpha in (0.0, 0.5, 1.0))


def sorted_key_weights(hist: Histogram, alpha: float) -> np.ndarray:
    """:func:`key_weights` heaviest first, sorted once per histogram and alpha: every page size's
    level and root-runs bounds read the same three orders (a full sort is about 1 s at 10M keys)."""
    cache = hist.__dict__.setdefault("_sorted_key_weights", {})
    if alpha not in cache:
        cache[alpha] = np.sort(key_weights(hist, alpha))[::-1]
    return cache[alpha]


def key_weights(hist: Histogram, alpha: float) -> np.ndarray:
    """Hits plus misses moved onto keys: share alpha of gap g onto key g-1, the rest onto key g
    (the end gaps whole onto their only neighbour); no tree costs less on these than on (p, q)."""
    w = hist.p.copy()
    w[:-1] += alpha * hist.q[1:-1]
    w[1:] += (1 - alpha) * hist.q[1:-1]
    w[0] += hist.q[0]
    w[-1] += hist.q[-1]
    return w


def pack_levels(w: np.ndarray, first_depth: int, first_size: int, growth: int) -> float:
    """min over level assignments of sum w * depth: ``first_size`` slots at ``first_depth``,
    each deeper level ``growth`` times the one above; the heaviest weights go shallowest."""
    return pack_sorted(np.sort(w)[::-1], first_depth, first_size, growth)


def pack_sorted(ws: np.ndarray, first_depth: int, first_size: int, growth: int) -> float:
    """:func:`pack_levels` of weights already sorted heaviest first."""
    cum = np.concatenate([[0.0], np.cumsum(ws)])
    cost, start, d, size = 0.0, 0, first_depth, first_size
    while start < ws.size:
        end = min(ws.size, start + size)
        cost += d * (cum[end] - cum[start])
        start, d, size = end, d + 1, size * growth
    return float(cost)


def lower_bounds(hist: Histogram, c: int) -> dict[str, float]:
    """Every bound by name; the planner takes the max."""
    return {
        "entropy": entropy_bound(hist, c),
        "level_capacity": level_capacity_bound(hist, c),
        "root_runs": root_runs_bound(hist, c),
    }


def root_runs_bound(hist: Histogram, c: int, heavy: int | None = None) -> float:
    """The level-capacity bound, charged for hot keys that sit next to each other in key order.

    Proof. Move miss weights onto keys as in :func:`level_capacity_bound` (valid for any
    tree); w are the key weights. Let S be the root page's keys, |S| <= c, forming r maximal
    runs of consecutive keys. Every other key lies in one of at most r + 1 holes between the
    runs, each hole's keys in one subtree below the root, so at most (r+1)((c+1)^j - 1) of them
    have depth <= j + 1. Hence cost >= w(S) + pack_r(keys not in S), pack_r being the best
    assignment of depths >= 2 under those capacities. Removing the c heaviest keys (top) instead
    of S leaves weights that are element-wise no heavier, and each unit of weight swapped in
    costs at least depth 2, so pack_r(not S) >= pack_r(not top) + 2 (w(top) - w(S)). So
    cost >= w(top) + pack_r(not top) + (w(top) - N_r), with N_r the most weight <= c keys can
    have in exactly r runs, and the bound is the minimum of that over r = 1..c. With r = c and
    N_c <= w(top) it is never below the level-capacity bound; it gains where the hottest keys
    are clustered (they cannot all sit in the root and still leave room at depth 2).

    N_r is over-estimated, which keeps the bound valid: only the ``heavy`` (default 2c + 2)
    heaviest keys are kept, each other key counted at tau, the heaviest weight left out; m light
    keys change the run count by at most m; and the count limit is relaxed by Lagrange
    multipliers lambda >= 0 (weak duality, min over a grid of lambda).
    """
    n, total = hist.n, hist.total
    if n == 0 or total <= 0 or n <= c:
        return level_capacity_bound(hist, c)
    return max(
        _root_runs(key_weights(hist, alpha), c, heavy or 2 * c + 2, sorted_key_weights(hist, alpha)) / total
        for alpha in (0.0, 0.5, 1.0)
    )


def forget_sorted_key_weights(hist: Histogram) -> None:
    """Drop the sorted weights :func:`sorted_key_weights` keeps (n floats per alpha)."""
    hist.__dict__.pop("_sorted_key_weights", None)


def _root_runs(w: np.ndarray, c: int, heavy: int, ws: np.ndarray | None = None) -> float:
    ws = np.sort(w)[::-1] if ws is None else ws
    top = float(ws[:c].sum())
    rest_cum = np.concatenate([[0.0], np.cumsum(ws[c:])])
    N = np.minimum(runs_weight_upper(w, c, heavy, ws), top)  # no c keys outweigh the c heaviest
    out = np.inf
    for r in range(1, c + 1):
        if N[r] == -np.inf:
            continue  # no set of <= c keys has exactly r runs
        out = min(out, top + _pack_holes(rest_cum, c, r) + (top - N[r]))
    return float(out)


def _pack_holes(cum: np.ndarray, c: int, r: int) -> float:
    """pack_r: depth j + 1 >= 2 holds cumulatively (r+1)((c+1)^j - 1) keys, heaviest first."""
    size = cum.size - 1
    cost, start, j = 0.0, 0, 1
    while start < size:
        end = min(size, (r + 1) * ((c + 1) ** j - 1))
        cost += (j + 1) * (cum[end] - cum[start])
        start, j = end, j + 1
    return cost


def runs_weight_upper(w: np.ndarray, c: int, heavy: int, ws: np.ndarray | None = None) -> np.ndarray:
    """U[r] >= the most weight of at most c keys forming exactly r runs (r = 0..c; -inf: none).
    ``ws``: w sorted heaviest first, when already at hand."""
    n = w.size
    m = min(n, heavy)
    if m < n:
        # the m heaviest keys, ties by rank (as a stable sort would take them), and the next
        # weight, by one partition instead of a full sort
        tau = float(ws[m] if ws is not None else np.partition(w, n - m - 1)[n - m - 1])
        above = np.flatnonzero(w > tau)
        keep = np.sort(np.concatenate([above, np.flatnonzero(w == tau)[: m - above.size]]))
    else:
        keep, tau = np.arange(n), 0.0
    light = min(c, n - m)
    hw = w[keep]
    adjacent = np.concatenate([[False], np.diff(keep) == 1])
    # any lambda >= 0 is valid; fewer of them for large c keeps the O(c^2) work per lambda bounded
    count = int(np.clip(40 * (700 / max(c, 1)) ** 2, 6, 40))
    ranks = np.unique(np.geomspace(1, m, count).astype(int)) - 1
    lambdas = np.unique(np.concatenate([[0.0], np.sort(hw)[::-1][ranks]]))
    return runs_upper(hw, adjacent, c, lambdas, light, tau)


def runs_upper_plain(hw, adjacent, c, lambdas, light, tau) -> np.ndarray:
    """The plain reference of :func:`advisor.optimize.runs_kernel.runs_upper` (tests compare)."""
    U = np.full(c + 1, np.inf)
    for lam in lambdas:
        D = _runs_dp(hw - lam, adjacent, c)  # D[r]: best sum of (w - lam) in exactly r runs
        bound = D + lam * c
        reach = D
        for ml in range(1, light + 1):  # ml light keys, each worth at most tau
            reach = _widen(reach)  # run count moved by at most ml
            bound = np.maximum(bound, reach + lam * (c - ml) + tau * ml)
        U = np.minimum(U, bound)
    return U


def _runs_dp(v: np.ndarray, adjacent: np.ndarray, c: int) -> np.ndarray:
    """max over subsets with exactly r runs (r = 0..c) of the sum of v; -inf where impossible."""
    inn = np.full(c + 1, -np.inf)
    out = np.full(c + 1, -np.inf)
    out[0] = 0.0
    for x, adj in zip(v.tolist(), adjacent.tolist(), strict=False):
        both = np.maximum(inn, out)
        new_in = np.full(c + 1, -np.inf)
        new_in[1:] = (out if adj else both)[:-1] + x  # a new run starts here
        if adj:
            np.maximum(new_in, inn + x, out=new_in)  # or the previous key's run goes on
        inn, out = new_in, both
    return np.maximum(inn, out)


def _widen(D: np.ndarray) -> np.ndarray:
    """out[r] = max(D[r-1], D[r], D[r+1])."""
    out = D.copy()
    np.maximum(out[1:], D[:-1], out=out[1:])
    np.maximum(out[:-1], D[1:], out=out[:-1])
    return out
