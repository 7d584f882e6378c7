"""The exact DP against published figures, brute force and its own evaluator."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from advisor.histogram import Histogram
from advisor.layout import check_layout, evaluate
from advisor.optimize import lower_bounds, solve_exact, uniform_layout

from .conftest import brute_force_optimum, random_hist, replay_cost


def test_clrs_worked_example_binary_case():
    # Cormen, Leiserson, Rivest & Stein, Introduction to Algorithms, 3rd ed., section 15.5:
    # expected search cost 2.75, which charges each miss one extra visit for its dummy leaf;
    # in the page model (no dummy leaves) that is 2.75 - sum(q) = 2.75 - 0.40 = 2.35.
    p = np.array([0.15, 0.10, 0.05, 0.10, 0.20])
    q = np.array([0.05, 0.10, 0.05, 0.05, 0.05, 0.10])
    hist = Histogram(p, q)
    res = solve_exact(hist, 1)
    check_layout(res.layout)
    assert res.objective == pytest.approx(2.35, abs=1e-12)
    assert evaluate(res.layout, hist).expected_page_reads == pytest.approx(2.35, abs=1e-12)
    assert res.objective + q.sum() == pytest.approx(2.75, abs=1e-12)
    # the book's optimal tree has k2 at the root
    assert list(res.layout.keys_of(0)) == [1]


weights = st.lists(st.integers(0, 50), min_size=1, max_size=7)


@settings(max_examples=120, deadline=None)
@given(data=st.data(), c=st.integers(1, 4))
def test_dp_equals_brute_force_on_tiny_instances(data, c):
    p = data.draw(weights)
    q = data.draw(st.lists(st.integers(0, 50), min_size=len(p) + 1, max_size=len(p) + 1))
    if sum(p) + sum(q) == 0:
        p[0] = 1
    hist = Histogram(np.array(p, float), np.array(q, float))
    res = solve_exact(hist, c)
    check_layout(res.layout)
    assert res.objective == pytest.approx(brute_force_optimum(p, q, c), rel=1e-12)
    assert evaluate(res.layout, hist).expected_page_reads == pytest.approx(res.objective, rel=1e-12)


@pytest.mark.parametrize("seed", range(6))
@pytest.mark.parametrize("c", [1, 2, 3, 5, 9, 40])
def test_properties_on_random_instances(seed, c):
    rng = np.random.default_rng(seed)
    hist = random_hist(rng, int(rng.integers(1, 90)))
    res = solve_exact(hist, c)
    check_layout(res.layout)
    cost = evaluate(res.layout, hist).expected_page_reads
    assert cost == pytest.approx(res.objective, rel=1e-12)  # DP value = evaluator value
    assert cost == pytest.approx(replay_cost(res.layout, hist), rel=1e-12)  # = a search replay
    assert cost <= evaluate(uniform_layout(hist.n, c), hist).expected_page_reads + 1e-12
    for name, bound in lower_bounds(hist, c).items():
        assert bound <= cost + 1e-12, name
    # more room per page never costs more
    assert solve_exact(hist, c + 1).objective <= res.objective + 1e-12


def test_exact_at_three_hundred_keys_any_capacity():
    rng = np.random.default_rng(11)
    hist = random_hist(rng, 300)
    previous = np.inf
    for c in (1, 2, 7, 60, 150, 299, 300):
        res = solve_exact(hist, c)
        check_layout(res.layout)
        cost = evaluate(res.layout, hist).expected_page_reads
        assert cost == pytest.approx(res.objective, rel=1e-12)
        assert cost <= previous + 1e-12
        previous = cost


def test_gotlieb_wood_monotonicity_counterexample_still_solved_exactly():
    # Root monotonicity fails for multiway trees with positive miss weights (Gotlieb & Wood,
    # Int. J. Computer Math. 9, 1981). This instance is this project's own, found by brute force
    # and shown here: c = 2, p = (4,7,1,2), q = (2,5,2,9,9); the optimal first root key of keys
    # 1..3, 1..4 and 2..4 is k2, k3, k2 (it moves right, then back left as the range shrinks).
    p, q = [4, 7, 1, 2], [2, 5, 2, 9, 9]
    hist = Histogram(np.array(p, float), np.array(q, float))
    assert solve_exact(hist, 2).objective == pytest.approx(brute_force_optimum(p, q, 2), rel=1e-12)
    firsts = []
    for lo, hi in [(0, 3), (0, 4), (1, 4)]:
        sub = Histogram(np.array(p[lo:hi], float), np.array(q[lo : hi + 1], float))
        assert solve_exact(sub, 2).objective == pytest.approx(brute_force_optimum(p[lo:hi], q[lo : hi + 1], 2))
        firsts.append(int(solve_exact(sub, 2).layout.keys_of(0)[0]) + lo + 1)
    assert firsts == [2, 3, 2]


def test_degenerate_inputs():
    empty = Histogram(np.zeros(0), np.zeros(1))
    assert solve_exact(empty, 3).layout.pages == 0
    zero = Histogram(np.zeros(5), np.zeros(6))
    res = solve_exact(zero, 2)
    check_layout(res.layout)
    assert res.objective == 0.0
    one = Histogram(np.array([3.0]), np.array([1.0, 1.0]))
    assert solve_exact(one, 1).objective == 1.0
