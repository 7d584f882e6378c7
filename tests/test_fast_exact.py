"""The fast forest solver equals the textbook recurrence; near-optimal helpers keep layouts valid."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from advisor.histogram import Histogram
from advisor.layout import check_layout, evaluate
from advisor.optimize import (
    forest_chain,
    hot_first_layout,
    integer_weights,
    polish,
    solve_exact,
    solve_textbook,
    uniform_layout,
)

from .conftest import brute_force_optimum, random_hist, replay_cost


def test_forest_chain_is_a_binary_addition_chain():
    # Knuth, TAOCP Vol. 2, 4.6.3: the binary method reaches t in floor(log2 t) + popcount(t) - 1 steps
    for c in (1, 2, 3, 7, 12, 100, 341, 1000):
        split = forest_chain(c)
        assert c in split
        for s, (a, b) in split.items():
            assert a + b + 1 == s
            assert a == 0 or a in split
            assert b == 0 or b in split
        t = c + 1
        assert len(split) == int(np.log2(t)) + bin(t).count("1") - 1


shapes = st.sampled_from(["random", "zeros", "equal", "dominant", "misses-only"])


@settings(max_examples=150, deadline=None)
@given(
    n=st.integers(1, 60),
    c=st.integers(1, 70),
    shape=shapes,
    seed=st.integers(0, 10_000),
    scale=st.sampled_from([1.0, 0.37, 4e9]),
)
def test_fast_solver_equals_textbook(n, c, shape, seed, scale):
    # scale 1: whole counts (int32 tables); 0.37: fractional weights and 4e9: counts too large
    # for int32 (both float64 tables)
    rng = np.random.default_rng(seed)
    p = rng.integers(0, 100, n).astype(float)
    q = rng.integers(0, 40, n + 1).astype(float)
    if shape == "zeros":
        p[rng.random(n) < 0.8] = 0
        q[rng.random(n + 1) < 0.8] = 0
    elif shape == "equal":
        p[:], q[:] = 1.0, 1.0
    elif shape == "dominant":
        p[rng.integers(n)] = 1e6
    elif shape == "misses-only":
        p[:] = 0
    if p.sum() + q.sum() == 0:
        q[0] = 1
    hist = Histogram(p * scale, q * scale)
    assert integer_weights(hist, c) == (scale == 1.0)
    fast, slow = solve_exact(hist, c), solve_textbook(hist, c)
    check_layout(fast.layout)
    assert fast.objective == pytest.approx(slow.objective, rel=1e-12, abs=1e-12)
    assert evaluate(fast.layout, hist).expected_page_reads == pytest.approx(fast.objective, rel=1e-12)


@pytest.mark.parametrize("extra, everywhere", [(0, False), (1, False), (1, True), (2, False)])
@pytest.mark.parametrize("c", [1, 2, 4, 30])
def test_hot_first_is_valid_and_within_height(extra, everywhere, c):
    rng = np.random.default_rng(c + extra)
    hist = random_hist(rng, 700)
    layout = hot_first_layout(hist, c, extra, everywhere)
    check_layout(layout)
    cost = evaluate(layout, hist)
    assert cost.expected_page_reads == pytest.approx(replay_cost(layout, hist), rel=1e-12)
    if extra == 0:
        assert cost.height <= evaluate(uniform_layout(hist.n, c), hist).height


@pytest.mark.parametrize("c", [2, 5, 16])
def test_polish_is_valid_and_never_worse(c):
    rng = np.random.default_rng(c)
    hist = random_hist(rng, 900)
    for layout in (uniform_layout(hist.n, c), hot_first_layout(hist, c, 1)):
        before = evaluate(layout, hist).expected_page_reads
        after_layout = polish(layout, hist, ops_budget=5e7, max_subtree_ops=5e6)
        check_layout(after_layout)
        assert evaluate(after_layout, hist).expected_page_reads <= before + 1e-12


@settings(max_examples=60, deadline=None)
@given(n=st.integers(2, 7), c=st.integers(1, 5), seed=st.integers(0, 10_000), data=st.data())
def test_forced_root_size_equals_brute_force(n, c, seed, data):
    # the re-cut's building block: best tree whose root page holds exactly w keys
    if n <= c:
        c = n - 1
    w = data.draw(st.integers(1, c))
    hist = random_hist(np.random.default_rng(seed), n)
    res = solve_exact(hist, c, root_keys=w)
    check_layout(res.layout)
    assert res.layout.keys_of(0).size == w
    assert res.objective == pytest.approx(brute_force_optimum(hist.p, hist.q, c, root_size=w), rel=1e-12, abs=1e-12)
    assert evaluate(res.layout, hist).expected_page_reads == pytest.approx(res.objective, rel=1e-12, abs=1e-12)


@settings(max_examples=40, deadline=None)
@given(n=st.integers(20, 60), c=st.integers(1, 12), seed=st.integers(0, 10_000), data=st.data())
def test_forced_root_size_equals_textbook_forest(n, c, seed, data):
    # against the textbook tables: W(0, n) + F(0, n, w) (Vaishnavi, Kriegel & Wood 1980)
    from advisor.optimize.exact import _tables

    w = data.draw(st.integers(1, c))
    hist = random_hist(np.random.default_rng(seed), n)
    res = solve_exact(hist, c, root_keys=w)
    t = _tables(hist.p, hist.q, c)
    assert res.objective == pytest.approx((hist.total + t.F[w][0, n]) / hist.total, rel=1e-12)
