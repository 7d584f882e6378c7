"""The whole-tree re-solve over candidate upper-page keys: with every key a candidate it is the
exact budgeted DP (checked against brute force over every tree and against the textbook-form
tables of :mod:`advisor.optimize.constrained`); with fewer, it searches a family that holds the
layout it came from, and everything it returns keeps the budget."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from advisor.histogram import Histogram
from advisor.layout import check_layout, evaluate
from advisor.optimize import min_height
from advisor.optimize.constrained import _Levels
from advisor.optimize.restricted import _Tables, lower_levels, restricted_resolve, upper_keys, with_hottest
from advisor.optimize.within import fewest_pages, within_budget_layout

from .test_budget_exact import check_against_brute_force, classic_frontier, draw_histogram


def _prefix(hist: Histogram):
    return np.concatenate([[0.0], np.cumsum(hist.p)]), np.concatenate([[0.0], np.cumsum(hist.q)])


@settings(max_examples=60, deadline=None)
@given(data=st.data(), c=st.integers(1, 3))
def test_every_key_a_candidate_is_the_brute_force_optimum(data, c):
    n = data.draw(st.integers(2, 7))
    p, q, hist = draw_histogram(data, n)
    front = classic_frontier(tuple(p), tuple(q), c)
    hmin = min_height(n, c)
    even = within_budget_layout(hist, c, fewest_pages(n, c), max(hmin, 2))
    for height in sorted({max(hmin, 2), hmin + 2}):
        for pages in sorted({fewest_pages(n, c), n}):
            res = restricted_resolve(even, hist, pages, height, ops=1e12)
            if n <= c:
                assert res is None  # one page: nothing to re-solve
                continue
            check_against_brute_force(res, hist, front, pages, height)  # every key a candidate


@pytest.mark.parametrize("seed", range(12))
def test_tables_equal_the_exact_dp_at_every_price_and_lower_depth(seed):
    rng = np.random.default_rng(seed)
    n, c = int(rng.integers(8, 70)), int(rng.integers(2, 6))
    height = min_height(n, c) + int(rng.integers(0, 3))
    hist = Histogram(rng.zipf(1.5, n).astype(float), rng.integers(0, 3, n + 1).astype(float))
    P, Q = _prefix(hist)
    lam = float(rng.choice([0.0, 1.0, 7.0, 40.0]))
    want = _Levels(hist.p, hist.q, c, max(height, 2), lam).value(max(height, 2))
    for lower in range(1, max(height, 2)):
        tables = _Tables(P, Q, c, lam, np.arange(n), max(height, 2), lower)
        assert tables.value == pytest.approx(want, rel=1e-12)
        layout = tables.layout()
        check_layout(layout)
        cost = evaluate(layout, hist).expected_page_reads * hist.total
        assert cost + lam * layout.pages == pytest.approx(tables.value, rel=1e-9)


@pytest.mark.parametrize("seed", range(8))
def test_the_family_holds_the_layout_it_came_from(seed):
    """At every price the family's optimum is no dearer than the starting layout (its upper
    pages' keys are candidates), and the tree it rebuilds draws its upper pages from them."""
    rng = np.random.default_rng(100 + seed)
    n, c = int(rng.integers(150, 400)), int(rng.integers(3, 6))
    prob = 1.0 / np.arange(1, n + 1) ** 1.1
    hist = Histogram(rng.multinomial(20 * n, rng.permutation(prob / prob.sum())).astype(float), np.ones(n + 1))
    height = min_height(n, c)
    start = within_budget_layout(hist, c, fewest_pages(n, c) + 3, height)
    lower = lower_levels(n, c, height)
    cand = with_hottest(upper_keys(start, height, lower), hist, int(rng.integers(0, 30)))
    assert cand.size < n
    P, Q = _prefix(hist)
    base = evaluate(start, hist).expected_page_reads * hist.total
    for lam in (0.0, 5.0, 50.0):
        tables = _Tables(P, Q, c, lam, cand, height, lower)
        assert tables.value <= base + lam * start.pages + 1e-6
        layout = tables.layout()
        check_layout(layout)
        depth = layout.depths()
        upper = np.concatenate([layout.keys_of(g) for g in np.nonzero(depth <= height - lower)[0]])
        assert np.isin(upper, cand).all()


def test_re_solve_keeps_the_budget_and_is_not_proven_with_some_keys():
    rng = np.random.default_rng(7)
    n, c = 1000, 5
    prob = 1.0 / np.arange(1, n + 1)
    hist = Histogram(rng.multinomial(50 * n, rng.permutation(prob / prob.sum())).astype(float), np.ones(n + 1))
    height, pages = min_height(n, c) + 1, fewest_pages(n, c) + 10
    start = within_budget_layout(hist, c, pages, height)
    res = restricted_resolve(start, hist, pages, height, ops=1e9)  # every key would take ~9e9
    assert res is not None and not res.proven and res.dual_bound == 0.0
    check_layout(res.layout)
    assert res.layout.pages <= pages and res.layout.depths().max() <= height
    assert restricted_resolve(start, hist, pages, height, ops=1e3) is None  # nothing affordable


@settings(max_examples=50, deadline=None)
@given(data=st.data(), L=st.integers(1, 3), F=st.integers(2, 4))
def test_bplus_every_boundary_a_candidate_is_the_brute_force_optimum(data, L, F):
    from advisor.optimize.bplus import bplus_height, bplus_weights, uniform_bplus
    from advisor.optimize.bplus_restricted import bplus_restricted_resolve

    from .test_budget_exact import bplus_frontier

    n = data.draw(st.integers(2, 7))
    p, q, hist = draw_histogram(data, n)
    front = bplus_frontier(tuple(bplus_weights(hist)), L, F)
    even = uniform_bplus(n, L, F)
    hmin = bplus_height(n, L, F)
    for height in sorted({max(hmin, 3), hmin + 2}):
        for pages in sorted({even.pages, 2 * n}):
            res = bplus_restricted_resolve(even, hist, pages, height, ops=1e12)
            if n <= L:
                assert res is None
                continue
            check_against_brute_force(res, hist, front, pages, height)


@pytest.mark.parametrize("seed", range(10))
def test_bplus_tables_equal_the_exact_dp_and_hold_the_starting_layout(seed):
    from advisor.optimize.bplus import bplus_height, bplus_weights
    from advisor.optimize.bplus_constrained import _Levels as BplusLevels
    from advisor.optimize.bplus_restricted import _Tables as BplusTables
    from advisor.optimize.bplus_restricted import upper_bounds
    from advisor.optimize.bplus_within import bplus_within_layout

    rng = np.random.default_rng(200 + seed)
    n, L, F = int(rng.integers(6, 60)), int(rng.integers(2, 6)), int(rng.integers(2, 5))
    height = max(3, bplus_height(n, L, F) + int(rng.integers(0, 2)))
    hist = Histogram(rng.zipf(1.5, n).astype(float), rng.integers(0, 3, n + 1).astype(float))
    w = bplus_weights(hist)
    S = np.concatenate([[0.0], np.cumsum(w)])
    lam = float(rng.choice([0.0, 1.0, 7.0, 40.0]))
    want = BplusLevels(w, L, F, height, lam).value(height)
    for lower in range(1, height):
        tables = BplusTables(S, L, F, lam, np.arange(n + 1), height, lower)
        assert tables.value == pytest.approx(want, rel=1e-12)
        layout = tables.layout()
        check_layout(layout)
        cost = evaluate(layout, hist).expected_page_reads * hist.total
        assert cost + lam * layout.pages == pytest.approx(tables.value, rel=1e-9)
    # a starting layout's own boundaries (no hot keys added) keep it in the family
    start = bplus_within_layout(hist, L, F, 2 * n, height)
    if start is None:
        return
    lower = 1
    bd = np.unique(upper_bounds(start, n, height, lower))  # sorted, each once; no hot keys added
    base = evaluate(start, hist).expected_page_reads * hist.total
    tables = BplusTables(S, L, F, lam, bd, height, lower)
    assert tables.value <= base + lam * start.pages + 1e-6


@pytest.mark.parametrize("model", ["btree", "bplus"])
def test_planner_proves_small_plans_through_the_re_solve_and_skips_it_at_exact_seconds_zero(model):
    """With the exact DP forbidden (no memory for its tables) a small table still ends proven
    optimal: every key fits the re-solve's work cap, which makes it the exact budgeted DP; with
    --exact-seconds 0 it does not run at all."""
    from advisor.planner import PlanOptions, plan_capacity

    rng = np.random.default_rng(3)
    n, c = 300, 4
    prob = 1.0 / np.arange(1, n + 1)
    hist = Histogram(rng.multinomial(30 * n, rng.permutation(prob / prob.sum())).astype(float), np.ones(n + 1))
    fan = c + 1 if model == "bplus" else 0
    plan = plan_capacity(hist, c, options=PlanOptions(exact_max_bytes=0, model=model, fanout=fan))
    assert plan.proven_optimal and plan.method.startswith("exact DP within the budget")
    assert plan.lower_bound == pytest.approx(plan.recommended_cost.expected_page_reads, rel=1e-9)
    assert plan.budget.allows(plan.recommended)
    quick = plan_capacity(hist, c, options=PlanOptions(exact_seconds=0, model=model, fanout=fan))
    assert "re-solve" not in quick.method and not quick.method.startswith("exact DP")
    assert plan.recommended_cost.expected_page_reads <= quick.recommended_cost.expected_page_reads + 1e-12
