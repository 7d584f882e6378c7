"""Compiled rows of the candidate-restricted budgeted B+-tree DP
(:mod:`advisor.optimize.bplus_restricted`).

Lower levels are indexed by key position (``A[i, L]``: the cheapest subtree of at most h levels
on keys i..i+L-1, banded to L <= L_leaf F^(h-1)); upper levels by candidate boundaries
(``R[a, b]``: keys bd[a]..bd[b]-1, children split only at candidate boundaries). A row function
fills the forest values G[s, .] (exactly s consecutive children) of one interval start; the
rebuild calls it again on the chosen tree's path, so no argmin table is kept.
"""

from __future__ import annotations

import numpy as np
from numba import njit


@njit(cache=True)
def bp_leaf_level(S, leaf, lam, width):
    """A_1: one leaf of at most ``leaf`` keys."""
    n = S.shape[0] - 1
    A = np.full((n + 1, width + 1), np.inf)
    for i in range(n + 1):
        for L in range(1, min(leaf, n - i, width) + 1):
            A[i, L] = S[i + L] - S[i] + lam
    return A


@njit(cache=True)
def bp_lower_row(F, prev, i, G):
    """G[s, L] for s = 1..F: keys i..i+L-1 split into exactly s consecutive subtrees of cost
    ``prev`` (one level lower)."""
    n = prev.shape[0] - 1
    width = G.shape[1] - 1
    cap_prev = prev.shape[1] - 1
    top = min(width, n - i)
    G[:, :] = np.inf
    for L in range(1, min(top, cap_prev) + 1):
        G[1, L] = prev[i, L]
    for s in range(2, F + 1):
        for L in range(s, top + 1):
            best = np.inf
            for t in range(max(s - 1, L - cap_prev), L):  # first t keys in s - 1 parts, the rest in one
                left = G[s - 1, t]
                if left < best:
                    v = left + prev[i + t, L - t]
                    if v < best:
                        best = v
            G[s, L] = best


@njit(cache=True)
def bp_lower_level(S, leaf, F, lam, prev, width):
    """A_h from A_{h-1} (= ``prev``), banded to ``width`` keys."""
    n = S.shape[0] - 1
    A = np.full((n + 1, width + 1), np.inf)
    G = np.empty((F + 1, width + 1))
    for i in range(n + 1):
        bp_lower_row(F, prev, i, G)
        for L in range(1, min(width, n - i) + 1):
            if L <= leaf:
                A[i, L] = S[i + L] - S[i] + lam
                continue
            inner = np.inf
            for s in range(2, F + 1):
                if G[s, L] < inner:
                    inner = G[s, L]
            A[i, L] = S[i + L] - S[i] + lam + inner
    return A


@njit(cache=True)
def bp_restricted_row(F, bd, prev, cap, cap_prev, a, G):
    """G[s, b] for s = 1..F: keys bd[a]..bd[b]-1 split at candidate boundaries into exactly s
    subtrees of cost ``prev`` (boundary-indexed, one level lower), for the ends b within ``cap``
    keys; returns the last such b."""
    m = bd.shape[0] - 1
    G[:, :] = np.inf
    b_hi = a
    while b_hi + 1 <= m and bd[b_hi + 1] - bd[a] <= cap:
        b_hi += 1
    for b in range(a + 1, b_hi + 1):
        G[1, b] = prev[a, b]
    first = np.empty(b_hi + 1, dtype=np.int64)  # the last part bd[k]..bd[b]-1 fits one level down
    k = a + 1
    for b in range(a + 1, b_hi + 1):
        while k < b and bd[b] - bd[k] > cap_prev:
            k += 1
        first[b] = k
    for s in range(2, F + 1):
        for b in range(a + s, b_hi + 1):
            best = np.inf
            for k in range(max(a + s - 1, first[b]), b):
                left = G[s - 1, k]
                if left < best:
                    v = left + prev[k, b]
                    if v < best:
                        best = v
            G[s, b] = best
    return b_hi


@njit(cache=True)
def bp_restricted_level(S, leaf, F, lam, bd, prev, cap, cap_prev, rows):
    """R_h from R_{h-1} (= ``prev``) for the interval starts ``rows``."""
    m = bd.shape[0] - 1
    R = np.full((m + 1, m + 1), np.inf)
    G = np.empty((F + 1, m + 1))
    for t in range(rows.shape[0]):
        a = rows[t]
        b_hi = bp_restricted_row(F, bd, prev, cap, cap_prev, a, G)
        for b in range(a + 1, b_hi + 1):
            L = bd[b] - bd[a]
            w = S[bd[b]] - S[bd[a]]
            if L <= leaf:
                R[a, b] = w + lam
                continue
            inner = np.inf
            for s in range(2, F + 1):
                if G[s, b] < inner:
                    inner = G[s, b]
            v = w + lam + inner
            R[a, b] = v if v < prev[a, b] else prev[a, b]
    return R


@njit(cache=True)
def bp_lift_lower(A, bd):
    """R_{lower}[a, b] = A[bd[a], bd[b] - bd[a]] (infinite beyond A's band)."""
    m = bd.shape[0] - 1
    width = A.shape[1] - 1
    R = np.full((m + 1, m + 1), np.inf)
    for a in range(m + 1):
        for b in range(a + 1, m + 1):
            L = bd[b] - bd[a]
            if L > width:
                break
            R[a, b] = A[bd[a], L]
    return R
