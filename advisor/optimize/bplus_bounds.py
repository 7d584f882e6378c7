"""Lower bounds on expected page reads of any B+-tree (every key in a leaf of at most L keys,
internal pages of at most F children, leaves at any depth)."""

from __future__ import annotations

import numpy as np

from ..histogram import Histogram
from .bounds import pack_levels
from .bplus import bplus_weights


def bplus_level_bound(hist: Histogram, L: int, F: int) -> float:
    """Lower bound: depth d holds at most F^(d-1) pages, so at most L F^(d-1) keys in leaves there,
    and none at depth 1 once n > L (the root must then be internal); the heaviest keys packed
    shallowest (ignores key order, so no layout beats it)."""
    if hist.n == 0 or hist.total <= 0:
        return 0.0
    if hist.n <= L:
        return 1.0
    return pack_levels(bplus_weights(hist), 2, L * F, F) / hist.total


WINDOW_DP_MAX = 600  # disjoint-window DP passes at most (each an O(n) vectorised sweep)
WINDOW_DP_WORK = 3e8  # keys x passes (about 10 s on this machine kind); beyond it the DP runs on key blocks


def best_disjoint_windows(w: np.ndarray, L: int, x_max: int) -> np.ndarray:
    """M[x] = largest total weight of at most x disjoint runs of at most L consecutive keys,
    for x = 0..x_max. DP over keys per x, each pass one sliding-window maximum. O(n x_max)."""
    from scipy.ndimage import maximum_filter1d

    n = w.size
    S = np.concatenate([[0.0], np.cumsum(w)])
    best = np.zeros(n + 1)  # F_{x}[i]: at most x runs within the first i keys
    g, r, cand = np.empty(n + 1), np.empty(n + 1), np.zeros(n + 1)
    out = [0.0]
    for _ in range(x_max):
        np.subtract(best, S, out=g)  # F_{x-1}[j] - S[j], j = 0..n
        # h[i] = max_{j in [i-L, i-1]} g[j] for i = 1..n: window [k-L+1, k] at k = i-1
        maximum_filter1d(g, size=L, output=r, mode="constant", cval=-np.inf, origin=(L - 1) // 2)
        np.add(S[1:], r[:-1], out=cand[1:])
        np.maximum(best, cand, out=cand)
        np.maximum.accumulate(cand, out=best)
        out.append(float(best[-1]))
        if out[-1] >= S[-1]:
            break
    return np.array(out)


def bplus_window_bound(hist: Histogram, L: int, F: int, work_cap: float | None = None) -> float:
    """Lower bound that knows leaves are runs of consecutive keys.

    Kraft's inequality over the leaves of any tree with fanout F gives at most F^(d-1) leaves at
    depth <= d, and none at depth 1 once n > L. So the weight answered at depth <= d is at most
    the best total of F^(d-1) disjoint runs of at most L keys (``best_disjoint_windows``; past
    WINDOW_DP_MAX runs, each further run adds at most the heaviest single run), and at most the
    weight of the F^(d-1) L heaviest keys. Expected reads = sum over d >= 0 of the share not yet
    answered at depth <= d.

    Past ``work_cap`` (keys x passes) the DP runs on blocks of b consecutive keys instead. A run
    of L keys touches at most ceil((L-1)/b) + 1 blocks, and the block covers of disjoint runs can
    only share end blocks, so their union is again at most as many disjoint runs of that many
    blocks: the block DP over-estimates the answered weight, which keeps the bound valid.
    """
    n, total = hist.n, hist.total
    if n == 0 or total <= 0:
        return 0.0
    if n <= L:
        return 1.0
    w = bplus_weights(hist)
    ws = np.sort(w)[::-1]
    cum_keys = np.concatenate([[0.0], np.cumsum(ws)])
    S = np.concatenate([[0.0], np.cumsum(w)])
    heaviest_run = float((S[L:] - S[:-L]).max()) if n >= L else float(S[-1])
    if -(-n // L) <= F:  # F runs of L consecutive keys already cover every key at depth 2
        return 2.0
    passes = min(F, WINDOW_DP_MAX)
    cap = WINDOW_DP_WORK if work_cap is None else work_cap
    block = max(1, -(-int(n * passes) // int(max(cap, 1))))  # keys per block of the DP
    if block == 1:
        M = best_disjoint_windows(w, L, passes)
    else:
        M = best_disjoint_windows(np.add.reduceat(w, np.arange(0, n, block)), -(-(L - 1) // block) + 1, passes)
    # Sum over depths of the share not yet answered. The weights' own sum (not ``total``, which
    # may differ from it in the last bits) is what "everything answered" means; once x L >= n
    # every key can be answered, so the loop ends; stopping early only drops non-negative terms.
    wsum = float(S[-1])
    cost, d = 2.0, 2  # the d = 0 term and the d = 1 term (a root with children answers nothing)
    while True:
        x = F ** (d - 1)
        answered = min(wsum, float(cum_keys[min(n, x * L)]))
        if x < M.size:
            answered = min(answered, float(M[x]))
        elif passes and M.size - 1 >= passes and M[-1] < wsum:
            answered = min(answered, float(M[-1]) + (x - (M.size - 1)) * heaviest_run)
        if answered >= wsum * (1 - 1e-12) or d > min(n + 2, 900):
            return cost
        cost += 1.0 - answered / wsum
        d += 1
