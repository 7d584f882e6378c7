"""Exact optima under page and height budgets vs brute force over every tree (n <= 7)."""

from __future__ import annotations

from functools import cache
from itertools import combinations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from advisor.histogram import Histogram
from advisor.layout import check_layout, evaluate
from advisor.optimize import min_height
from advisor.optimize.constrained import solve_within
from advisor.optimize.within import fewest_pages


def classic_frontier(p, q, c):
    """{(pages, height): least total cost} over EVERY classic B-tree (every key subset for
    every page, every shape); independent of the project's code."""
    n = len(p)
    P = np.concatenate([[0.0], np.cumsum(p)])
    Q = np.concatenate([[0.0], np.cumsum(q)])

    @cache
    def trees(lo, hi):  # keys lo..hi-1 (0-based): {(pages, height): cost}
        w = float(P[hi] - P[lo] + Q[hi + 1] - Q[lo])
        out: dict = {}
        keys = range(lo, hi)
        for size in range(1, min(c, hi - lo) + 1):
            for root in combinations(keys, size):
                edges = [lo - 1, *root, hi]
                options = {(1, 1): w}
                for a, z in zip(edges[:-1], edges[1:], strict=True):
                    if z - a - 1 <= 0:
                        continue
                    sub = trees(a + 1, z)
                    nxt: dict = {}
                    for (pg, ht), cost in options.items():
                        for (sp, sh), sc in sub.items():
                            k = (pg + sp, max(ht, sh + 1))
                            if cost + sc < nxt.get(k, np.inf):
                                nxt[k] = cost + sc
                    options = nxt
                for k, v in options.items():
                    if v < out.get(k, np.inf):
                        out[k] = v
        return out

    return trees(0, n)


def best_within(frontier, pages, height):
    return min((v for (pg, ht), v in frontier.items() if pg <= pages and ht <= height), default=np.inf)


@settings(max_examples=80, deadline=None)
@given(data=st.data(), c=st.integers(1, 3))
def test_constrained_exact_equals_brute_force(data, c):
    n = data.draw(st.integers(1, 7))
    p = np.array(data.draw(st.lists(st.integers(0, 30), min_size=n, max_size=n)), float)
    q = np.array(data.draw(st.lists(st.integers(0, 10), min_size=n + 1, max_size=n + 1)), float)
    if p.sum() + q.sum() == 0:
        p[0] = 1
    hist = Histogram(p, q)
    front = classic_frontier(tuple(p), tuple(q), c)
    hmin = min_height(n, c)
    for height in (hmin, hmin + 1, hmin + 3):
        for pages in sorted({fewest_pages(n, c), fewest_pages(n, c) + 1, n}):
            res = solve_within(hist, c, pages, height)
            check_layout(res.layout)
            assert res.layout.pages <= pages and res.layout.depths().max() <= height
            truth = best_within(front, pages, height) / hist.total
            got = evaluate(res.layout, hist).expected_page_reads
            assert got == pytest.approx(res.expected_page_reads, rel=1e-9)
            assert res.dual_bound <= truth + 1e-9  # the Lagrangian bound never exceeds the optimum
            assert got >= truth - 1e-9
            if res.proven:
                assert got == pytest.approx(truth, rel=1e-9, abs=1e-12)


def test_full_page_lemma_holds_with_a_page_price():
    """The DP tabulates only full root pages; with a price per page and a height limit that is
    still exact: its value equals min over EVERY tree of cost + price x pages (brute force)."""
    from advisor.optimize.constrained import _Levels

    rng = np.random.default_rng(5)
    for _ in range(60):
        n, c = int(rng.integers(3, 8)), int(rng.integers(1, 4))
        p, q = rng.integers(0, 20, n).astype(float), rng.integers(0, 5, n + 1).astype(float)
        p[0] += 1
        front = classic_frontier(tuple(p), tuple(q), c)
        for height in (min_height(n, c), min_height(n, c) + 2):
            for lam in (0.0, 0.5, 3.0, 50.0):
                truth = min(v + lam * pg for (pg, ht), v in front.items() if ht <= height)
                assert _Levels(p, q, c, height, lam).value(height) == pytest.approx(truth, rel=1e-12)


def bplus_frontier(w, L, F):
    """{(pages, height): least sum of w x leaf depth} over EVERY B+-tree (a range is a leaf of
    at most L keys, or an internal page over 2..F consecutive parts); independent code."""
    n = len(w)

    @cache
    def trees(lo, hi):
        lam = float(sum(w[lo:hi]))
        out = {(1, 1): lam} if hi - lo <= L else {}

        @cache
        def parts(a, k):  # a..hi-1 as exactly k parts: {(pages, height): cost}
            if k == 1:
                return trees(a, hi)
            acc: dict = {}
            for r in range(a + 1, hi - k + 2):
                for (p1, h1), c1 in trees(a, r).items():
                    for (p2, h2), c2 in parts(r, k - 1).items():
                        key = (p1 + p2, max(h1, h2))
                        acc[key] = min(acc.get(key, np.inf), c1 + c2)
            return acc

        for k in range(2, min(F, hi - lo) + 1):
            for (pg, ht), cost in parts(lo, k).items():
                key = (pg + 1, ht + 1)
                out[key] = min(out.get(key, np.inf), cost + lam)
        return out

    return trees(0, n)


@settings(max_examples=60, deadline=None)
@given(data=st.data(), L=st.integers(1, 3), F=st.integers(2, 4))
def test_bplus_constrained_exact_equals_brute_force(data, L, F):
    from advisor.optimize.bplus import bplus_height, bplus_weights, uniform_bplus
    from advisor.optimize.bplus_constrained import solve_bplus_within

    n = data.draw(st.integers(1, 7))
    p = np.array(data.draw(st.lists(st.integers(0, 30), min_size=n, max_size=n)), float)
    q = np.array(data.draw(st.lists(st.integers(0, 10), min_size=n + 1, max_size=n + 1)), float)
    if p.sum() + q.sum() == 0:
        p[0] = 1
    hist = Histogram(p, q)
    w = bplus_weights(hist)
    front = bplus_frontier(tuple(w), L, F)
    hmin = bplus_height(n, L, F)
    even = uniform_bplus(n, L, F).pages
    for height in (hmin, hmin + 1, hmin + 3):
        for pages in sorted({even, even + 1, 2 * n}):
            res = solve_bplus_within(hist, L, F, pages, height)
            check_layout(res.layout)
            assert res.layout.pages <= pages and res.layout.depths().max() <= height
            truth = best_within(front, pages, height) / hist.total
            got = evaluate(res.layout, hist).expected_page_reads
            assert got == pytest.approx(res.expected_page_reads, rel=1e-9)
            assert res.dual_bound <= truth + 1e-9
            assert got >= truth - 1e-9
            if res.proven:
                assert got == pytest.approx(truth, rel=1e-9, abs=1e-12)
