"""Compiled inner loops of the root-runs bound (:func:`advisor.optimize.bounds.runs_weight_upper`).

The plain loops walk the 2c + 2 heaviest keys once per Lagrange multiplier with a few numpy
calls per key: per-call overhead, about 2 s per plan at a million keys. The same arithmetic in
the same order runs here compiled, so the bound is bit-for-bit the plain one (the tests compare
them; ``benchmarks/bench_kernels.py`` times both).
"""

from __future__ import annotations

import numpy as np
from numba import njit


@njit(cache=True)
def runs_dp(v, adjacent, c):
    """max over subsets with exactly r runs (r = 0..c) of the sum of v; -inf where impossible."""
    inn = np.full(c + 1, -np.inf)
    out = np.full(c + 1, -np.inf)
    out[0] = 0.0
    new_in = np.empty(c + 1)
    for i in range(v.shape[0]):
        x = v[i]
        adj = adjacent[i]
        new_in[0] = -np.inf
        for r in range(1, c + 1):
            src = out[r - 1] if adj else max(inn[r - 1], out[r - 1])
            new_in[r] = src + x
        if adj:
            for r in range(c + 1):
                new_in[r] = max(new_in[r], inn[r] + x)
        for r in range(c + 1):
            out[r] = max(inn[r], out[r])
            inn[r] = new_in[r]
    res = np.empty(c + 1)
    for r in range(c + 1):
        res[r] = max(inn[r], out[r])
    return res


@njit(cache=True)
def runs_upper(hw, adjacent, c, lambdas, light, tau):
    """U[r] over every multiplier: the body of ``runs_weight_upper`` after its key selection."""
    U = np.full(c + 1, np.inf)
    reach = np.empty(c + 1)
    wide = np.empty(c + 1)
    for lam in lambdas:
        D = runs_dp(hw - lam, adjacent, c)
        bound = D + lam * c
        reach[:] = D
        for ml in range(1, light + 1):
            for r in range(c + 1):  # run count moved by at most one more light key
                best = reach[r]
                if r > 0:
                    best = max(best, reach[r - 1])
                if r < c:
                    best = max(best, reach[r + 1])
                wide[r] = best
            reach[:] = wide
            for r in range(c + 1):
                bound[r] = max(bound[r], reach[r] + lam * (c - ml) + tau * ml)
        for r in range(c + 1):
            U[r] = min(U[r], bound[r])
    return U
