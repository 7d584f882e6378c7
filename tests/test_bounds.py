"""Lower bounds against scipy, brute force and hand-checked level packing."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.stats import entropy as scipy_entropy
from scipy.stats import zipfian

from advisor.histogram import Histogram
from advisor.optimize import entropy_bound, level_capacity_bound, solve_exact
from advisor.optimize.bounds import root_runs_bound, runs_weight_upper

from .conftest import brute_force_optimum, random_hist


def test_entropy_matches_scipy():
    rng = np.random.default_rng(3)
    hist = random_hist(rng, 500)
    w = np.concatenate([hist.p, hist.q])
    assert hist.entropy_bits() == pytest.approx(scipy_entropy(w, base=2), rel=1e-12)


def test_entropy_of_zipf_workload_matches_scipy():
    # Zipf's law workload from scipy.stats.zipfian (s = 1, n = 1000)
    n = 1000
    p = zipfian.pmf(np.arange(1, n + 1), 1.0, n)
    hist = Histogram(p, np.zeros(n + 1))
    assert hist.entropy_bits() == pytest.approx(scipy_entropy(p, base=2), rel=1e-12)
    assert entropy_bound(hist, 10) == pytest.approx(max(1.0, scipy_entropy(p, base=2) / np.log2(21)))


def test_level_capacity_by_hand():
    # c = 2: depth 1 holds 2 keys, depth 2 holds 6. Weights 10,9,8,...,1 (no misses):
    # depth 1 gets 10+9, depth 2 gets 8..3, depth 3 gets 2+1.
    p = np.arange(10, 0, -1).astype(float)
    hist = Histogram(p, np.zeros(11))
    expected = (1 * 19 + 2 * (8 + 7 + 6 + 5 + 4 + 3) + 3 * 3) / 55
    assert level_capacity_bound(hist, 2) == pytest.approx(expected)


@settings(max_examples=80, deadline=None)
@given(data=st.data(), c=st.integers(1, 3))
def test_bounds_never_exceed_the_brute_force_optimum(data, c):
    n = data.draw(st.integers(1, 6))
    p = data.draw(st.lists(st.integers(0, 40), min_size=n, max_size=n))
    q = data.draw(st.lists(st.integers(0, 40), min_size=n + 1, max_size=n + 1))
    if sum(p) + sum(q) == 0:
        q[0] = 1
    hist = Histogram(np.array(p, float), np.array(q, float))
    opt = brute_force_optimum(p, q, c)
    assert entropy_bound(hist, c) <= opt + 1e-12
    assert level_capacity_bound(hist, c) <= opt + 1e-12


@pytest.mark.parametrize("c", [2, 8, 30])
def test_bounds_below_exact_optimum_on_zipf(c):
    n = 200
    rng = np.random.default_rng(c)
    p = zipfian.pmf(rng.permutation(n) + 1, 1.1, n) * 1e6
    q = np.zeros(n + 1)
    q[rng.integers(0, n + 1, 20)] = 1e3
    hist = Histogram(p, q)
    opt = solve_exact(hist, c).objective
    assert entropy_bound(hist, c) <= opt + 1e-12
    assert level_capacity_bound(hist, c) <= opt + 1e-12


def _runs(mask: np.ndarray) -> int:
    return int(np.sum(mask[1:] & ~mask[:-1]) + mask[0]) if mask.size else 0


_SUBSETS = dict(n=st.integers(1, 11), c=st.integers(1, 5), heavy=st.integers(1, 12), seed=st.integers(0, 10_000))


@settings(max_examples=10, deadline=None)
@given(**_SUBSETS)
def test_runs_weight_upper_bounds_every_subset(n, c, heavy, seed):
    _upper_bounds_every_subset(n, c, heavy, seed)


@pytest.mark.slow
@settings(max_examples=150, deadline=None)
@given(**_SUBSETS)
def test_runs_weight_upper_bounds_every_subset_many(n, c, heavy, seed):
    _upper_bounds_every_subset(n, c, heavy, seed)


def _upper_bounds_every_subset(n, c, heavy, seed):
    # brute force over all 2^n key subsets: the most weight of <= c keys in exactly r runs
    w = np.random.default_rng(seed).integers(0, 50, n).astype(float)
    upper = runs_weight_upper(w, c, heavy)
    exact = np.full(c + 1, -np.inf)
    for bits in range(1 << n):
        mask = np.array([(bits >> i) & 1 for i in range(n)], dtype=bool)
        r = _runs(mask)
        if mask.sum() <= c and r <= c:
            exact[r] = max(exact[r], w[mask].sum())
    reachable = np.isfinite(exact)
    assert np.all(upper[reachable] >= exact[reachable] - 1e-9)


def _clustered(rng, n):
    # hottest keys side by side in key order, as when a few key ranges take the traffic
    p = np.round(1e4 / np.arange(1, n + 1) ** rng.uniform(0.6, 1.4))
    start = int(rng.integers(0, n))
    p = np.roll(p, start)
    q = rng.integers(0, 20, n + 1).astype(float)
    return Histogram(p, q)


@settings(max_examples=60, deadline=None)
@given(n=st.integers(1, 7), c=st.integers(1, 4), seed=st.integers(0, 10_000), clustered=st.booleans())
def test_root_runs_bound_below_brute_force(n, c, seed, clustered):
    rng = np.random.default_rng(seed)
    hist = _clustered(rng, n) if clustered else random_hist(rng, n)
    assert root_runs_bound(hist, c) <= brute_force_optimum(hist.p, hist.q, c) + 1e-12


@settings(max_examples=40, deadline=None)
@given(n=st.integers(20, 250), c=st.integers(1, 14), seed=st.integers(0, 10_000), clustered=st.booleans())
def test_root_runs_bound_between_level_bound_and_optimum(n, c, seed, clustered):
    rng = np.random.default_rng(seed)
    hist = _clustered(rng, n) if clustered else random_hist(rng, n)
    bound = root_runs_bound(hist, c)
    assert level_capacity_bound(hist, c) - 1e-12 <= bound <= solve_exact(hist, c).objective + 1e-12


def test_root_runs_bound_gains_on_clustered_hot_keys():
    # consecutive hottest keys: the bound must beat the order-blind level bound
    hist = _clustered(np.random.default_rng(1), 400)
    assert root_runs_bound(hist, 8) > level_capacity_bound(hist, 8) * 1.02


def test_root_runs_bound_never_below_level_bound_at_large_capacity():
    # few Lagrange multipliers at large c over-estimate run weights loosely; the bound must
    # still fall back to the level bound (r = c with the c heaviest keys), never below it
    hist = _clustered(np.random.default_rng(2), 30_000)
    for c in (1500, 4096):
        assert root_runs_bound(hist, c) >= level_capacity_bound(hist, c) - 1e-12
