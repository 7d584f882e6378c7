"""Compiled rows of the candidate-restricted budgeted DP (:mod:`advisor.optimize.restricted`).

Two kinds of table, both for one price per page ``lam``:

* lower levels, indexed by key position: ``C[i, L]`` = the cheapest tree of at most h levels on
  keys i..i+L-1 (0-based), banded to L <= cap(h);
* upper levels, indexed by candidate boundaries: ``R[a, b]`` = the cheapest tree of at most h
  levels on keys lp[a]..rp[b]-1 whose pages above the lower levels hold candidate keys only.

A row function fills the forest values F[s, .] of one interval start for s = 0..c roots; the
level kernels call it for every start, and the rebuild calls it again for the starts on the
chosen tree's path (the same arithmetic, so the same values), so no argmin table is kept.
"""

from __future__ import annotations

import numpy as np
from numba import njit


@njit(cache=True)
def _weight(P, Q, i, length):
    """Hits on keys i..i+length-1 and misses in the gaps around them."""
    return P[i + length] - P[i] + Q[i + length + 1] - Q[i]


@njit(cache=True)
def leaf_level(P, Q, c, lam, width):
    """C_1: a single page over at most c keys; ``width`` columns (cap(1) = c, or fewer)."""
    n = P.shape[0] - 1
    C = np.full((n + 1, width + 1), np.inf)
    for i in range(n + 1):
        C[i, 0] = 0.0
        for L in range(1, min(c, n - i, width) + 1):
            C[i, L] = _weight(P, Q, i, L) + lam
    return C


@njit(cache=True)
def lower_row(P, Q, c, lam, prev, i, F):
    """F[s, L] for s = 0..c: the cheapest forest of s root keys on keys i..i+L-1 over subtrees
    of cost ``prev`` (one level lower), L up to F's width."""
    n = P.shape[0] - 1
    width = F.shape[1] - 1
    cap_prev = prev.shape[1] - 1
    top = min(width, n - i)
    F[:, :] = np.inf
    for L in range(0, min(top, cap_prev) + 1):
        F[0, L] = prev[i, L]
    for s in range(1, c + 1):
        for L in range(s, top + 1):
            best = np.inf
            # root at key i + x: left part x keys (forest of s - 1), right part L - x - 1 keys
            x_lo = max(s - 1, L - 1 - cap_prev)
            for x in range(x_lo, L):
                left = F[s - 1, x]
                if left < best:
                    v = left + prev[i + x + 1, L - x - 1]
                    if v < best:
                        best = v
            F[s, L] = best


@njit(cache=True)
def lower_level(P, Q, c, lam, prev, width):
    """C_h from C_{h-1} (= ``prev``), banded to ``width`` keys."""
    n = P.shape[0] - 1
    C = np.full((n + 1, width + 1), np.inf)
    F = np.empty((c + 1, width + 1))
    cap_prev = prev.shape[1] - 1
    for i in range(n + 1):
        lower_row(P, Q, c, lam, prev, i, F)
        C[i, 0] = 0.0
        for L in range(1, min(width, n - i) + 1):
            best = prev[i, L] if L <= cap_prev else np.inf
            inner = np.inf
            for s in range(1, c + 1):
                if F[s, L] < inner:
                    inner = F[s, L]
            v = _weight(P, Q, i, L) + lam + inner
            C[i, L] = v if v < best else best
    return C


@njit(cache=True)
def restricted_row(P, Q, c, lp, rp, prev, cap, cap_prev, a, F):
    """F[s, b] for s = 0..c: the cheapest forest of s candidate root keys on keys
    lp[a]..rp[b]-1 over subtrees of cost ``prev`` (boundary-indexed, one level lower), for the
    ends b whose range holds at most ``cap`` keys (subtrees below: at most ``cap_prev``)."""
    m = lp.shape[0] - 1
    F[:, :] = np.inf
    b_hi = a
    while b_hi + 1 <= m and rp[b_hi + 1] - lp[a] <= cap:
        b_hi += 1
    for b in range(a, b_hi + 1):
        F[0, b] = prev[a, b]
    # the last child (boundaries k + 1 .. b) holds at most cap_prev keys: k >= first[b]
    first = np.empty(b_hi + 1, dtype=np.int64)
    k = a
    for b in range(a, b_hi + 1):
        while k < b and rp[b] - lp[k + 1] > cap_prev:
            k += 1
        first[b] = k
    for s in range(1, c + 1):
        for b in range(a + s, b_hi + 1):
            best = np.inf
            for k in range(max(a + s - 1, first[b]), b):  # root: candidate k, between boundaries k and k + 1
                left = F[s - 1, k]
                if left < best:
                    v = left + prev[k + 1, b]
                    if v < best:
                        best = v
            F[s, b] = best
    return b_hi


@njit(cache=True)
def restricted_level(P, Q, c, lam, lp, rp, prev, cap, cap_prev, rows):
    """R_h from R_{h-1} (= ``prev``) for the interval starts ``rows`` (all of them for a middle
    level, only 0 for the top)."""
    m = lp.shape[0] - 1
    R = np.full((m + 1, m + 1), np.inf)
    F = np.empty((c + 1, m + 1))
    for t in range(rows.shape[0]):
        a = rows[t]
        b_hi = restricted_row(P, Q, c, lp, rp, prev, cap, cap_prev, a, F)
        for b in range(a, b_hi + 1):
            L = rp[b] - lp[a]
            if L <= 0:
                R[a, b] = 0.0
                continue
            inner = np.inf
            for s in range(1, c + 1):
                if F[s, b] < inner:
                    inner = F[s, b]
            v = _weight(P, Q, lp[a], L) + lam + inner
            R[a, b] = v if v < prev[a, b] else prev[a, b]
    return R


@njit(cache=True)
def lift_lower(C, lp, rp):
    """R_{lower}[a, b] = C[lp[a], rp[b] - lp[a]] (infinite beyond C's band)."""
    m = lp.shape[0] - 1
    width = C.shape[1] - 1
    R = np.full((m + 1, m + 1), np.inf)
    for a in range(m + 1):
        for b in range(a, m + 1):
            L = rp[b] - lp[a]
            if L < 0:
                continue
            if L <= width:
                R[a, b] = C[lp[a], L]
            else:
                break
    return R
