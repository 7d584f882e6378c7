"""Compiled kernels of the row-group partition (private: :mod:`advisor.rowgroups.partition` is the
plain API). Every kernel works on prefix arrays of one instance:

- ``U[j]``, ``V[i]`` (n + 1 entries, non-decreasing): the lookup weight that reads a group holding
  keys ``i .. j-1`` is ``U[j] - V[i]``;
- ``S[j]`` (n + 1 entries): rows of keys ``0 .. j-1``; ``tail`` extra rows (NULL keys) belong to
  the last group;
- a group read costs ``a + b * rows`` bytes; a group must hold at least ``m`` rows.
"""

from __future__ import annotations

import numpy as np
from numba import njit

INF = np.inf


@njit(cache=True, inline="always")
def _cost(U, V, S, n, tail, a, b, i, j):
    rows = S[j] - S[i]
    if j == n:
        rows += tail
    return (U[j] - V[i]) * (a + b * rows)


@njit(cache=True)
def last_feasible(S, n, tail, m):
    """``lim[j]``: the largest i with rows(i, j) >= m (-1 if none). Non-decreasing in j."""
    lim = np.empty(n + 1, dtype=np.int64)
    i = -1
    for j in range(n + 1):
        need = S[j] + (tail if j == n else 0.0) - m
        while i + 1 < j and S[i + 1] <= need:
            i += 1
        lim[j] = i
    return lim


@njit(cache=True)
def layers(U, V, S, n, tail, a, b, m, G, opt):
    """Exact optimum with exactly g groups for g = 1..G (Yao's monotone divide and conquer).

    Returns ``best[g]`` (cost of keys 0..n-1 in g groups, inf if no such partition) and fills
    ``opt[g, j]``: the start of the last group of the best g-group partition of keys 0..j-1.
    O(G n log n): the cost matrix is Monge (see partition.py), so the best last start is
    non-decreasing in j, and the feasible starts of each j form an interval whose ends are
    non-decreasing in j, which keeps that true with the row limits.
    """
    lim = last_feasible(S, n, tail, m)
    prev = np.full(n + 1, INF)
    cur = np.full(n + 1, INF)
    best = np.full(G + 1, INF)
    prev[0] = 0.0
    first = 0  # smallest j with prev[j] finite
    stack = np.empty((64, 4), dtype=np.int64)
    for g in range(1, G + 1):
        cur[:] = INF
        # smallest j reachable with g groups: lim[j] >= first
        lo_j = first + 1
        while lo_j <= n and lim[lo_j] < first:
            lo_j += 1
        if lo_j > n:
            break
        top = 0
        stack[0, 0] = lo_j
        stack[0, 1] = n
        stack[0, 2] = first
        stack[0, 3] = lim[n]
        top = 1
        while top > 0:
            top -= 1
            jl = stack[top, 0]
            jr = stack[top, 1]
            ol = stack[top, 2]
            orr = stack[top, 3]
            if jl > jr:
                continue
            j = (jl + jr) // 2
            hi = min(orr, lim[j])
            bi = ol
            bv = INF
            for i in range(ol, hi + 1):
                if prev[i] == INF:
                    continue
                v = prev[i] + _cost(U, V, S, n, tail, a, b, i, j)
                if v <= bv:  # ties: the largest start, so the choice stays monotone
                    bv = v
                    bi = i
            cur[j] = bv
            opt[g, j] = bi
            stack[top, 0] = jl
            stack[top, 1] = j - 1
            stack[top, 2] = ol
            stack[top, 3] = bi
            stack[top + 1, 0] = j + 1
            stack[top + 1, 1] = jr
            stack[top + 1, 2] = bi
            stack[top + 1, 3] = orr
            top += 2
        best[g] = cur[n]
        first = lo_j
        tmp = prev
        prev = cur
        cur = tmp
    return best


@njit(cache=True)
def priced(U, V, S, n, tail, a, b, m, lam, start):
    """Exact optimum of cost + ``lam`` per group over any number of groups, O(n log n).

    The candidate-queue method for Monge costs (Galil & Park, "Dynamic programming with
    convexity, concavity and sparsity", 1992): once a later start beats an earlier one at some
    end, it beats it at every later end, so each start owns an interval of ends. A start i joins
    when rows(i, j) >= m first holds. Fills ``start[j]`` (the last group's start for keys 0..j-1)
    and returns (value, groups) of the whole range; groups are the fewest among equal values.
    """
    lim = last_feasible(S, n, tail, m)
    f = np.full(n + 1, INF)
    cnt = np.zeros(n + 1, dtype=np.int64)
    f[0] = 0.0
    qi = np.empty(n + 1, dtype=np.int64)  # candidate starts
    qs = np.empty(n + 1, dtype=np.int64)  # first end each candidate owns
    head = 0
    tail_q = 0
    nxt = 0  # next start to enter the queue
    for j in range(1, n + 1):
        while nxt <= lim[j]:
            i = nxt
            nxt += 1
            if f[i] == INF:
                continue
            # drop candidates that i beats from where they start owning ends
            while tail_q > head:
                k = qi[tail_q - 1]
                s = max(qs[tail_q - 1], j)
                vk = f[k] + _cost(U, V, S, n, tail, a, b, k, s)
                vi = f[i] + _cost(U, V, S, n, tail, a, b, i, s)
                if vi < vk or (vi == vk and cnt[i] <= cnt[k]):
                    tail_q -= 1
                else:
                    break
            if tail_q == head:
                qi[tail_q] = i
                qs[tail_q] = j
                tail_q += 1
                continue
            # binary search the first end where i beats the last candidate
            k = qi[tail_q - 1]
            lo = max(qs[tail_q - 1], j) + 1
            hi = n + 1
            while lo < hi:
                mid = (lo + hi) // 2
                vk = f[k] + _cost(U, V, S, n, tail, a, b, k, mid)
                vi = f[i] + _cost(U, V, S, n, tail, a, b, i, mid)
                if vi < vk or (vi == vk and cnt[i] <= cnt[k]):
                    hi = mid
                else:
                    lo = mid + 1
            if lo <= n:
                qi[tail_q] = i
                qs[tail_q] = lo
                tail_q += 1
        while head + 1 < tail_q and qs[head + 1] <= j:
            head += 1
        if head < tail_q and qi[head] <= lim[j]:
            i = qi[head]
            f[j] = f[i] + _cost(U, V, S, n, tail, a, b, i, j) + lam
            cnt[j] = cnt[i] + 1
            start[j] = i
    return f[n], cnt[n]
