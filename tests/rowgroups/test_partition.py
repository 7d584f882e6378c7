"""The row-group partition optimiser against brute force over every partition (n <= 10) and the
plain O(G n^2) recurrence (n up to 300): exact for every group count, with and without a
minimum group size, NULL-key rows in the last group, and a price per group."""

from __future__ import annotations

import itertools

import numpy as np
import pytest

from advisor.rowgroups.partition import best_by_count, best_priced, best_within, instance


def _random(rng, n, zero_share=0.3):
    p = rng.pareto(1.0, n) * (rng.random(n) > zero_share)
    q = rng.pareto(1.5, n + 1) * (rng.random(n + 1) > 0.5)
    rows = rng.integers(1, 6, n)
    return p, q, rows


def _all_partitions(n):
    for k in range(0, n):
        for inner in itertools.combinations(range(1, n), k):
            yield np.array((0,) + inner, dtype=np.int64)


def _feasible(inst, starts):
    ends = np.append(starts[1:], inst.n)
    rows = inst.S[ends] - inst.S[starts]
    rows[-1] += inst.tail
    return bool((rows >= inst.min_rows - 1e-9).all())


def _plain(inst, G):
    """The textbook recurrence f_g(j) = min_i f_{g-1}(i) + cost(i, j) over every start i
    (vectorised over i with numpy; no monotonicity used)."""
    n = inst.n
    f = np.full((G + 1, n + 1), np.inf)
    f[0, 0] = 0.0
    for j in range(1, n + 1):
        i = np.arange(j)
        rows = inst.S[j] - inst.S[i] + (inst.tail if j == n else 0)
        cost = (inst.U[j] - inst.V[i]) * (inst.a + inst.b * rows)
        cost[rows < inst.min_rows - 1e-9] = np.inf
        for g in range(1, G + 1):
            f[g, j] = np.min(f[g - 1, :j] + cost)
    return f[:, n]


@pytest.mark.parametrize("seed", range(40))
def test_layers_equal_brute_force(seed):
    rng = np.random.default_rng(seed)
    n = int(rng.integers(1, 11))
    p, q, rows = _random(rng, n)
    tail = float(rng.integers(0, 3))
    m = float(rng.choice([0, 1, 4, 7]))
    inst = instance(p, q, rows, tail, float(rng.uniform(0, 50)), float(rng.uniform(0.1, 5)), m)
    G = n
    got = best_by_count(inst, G)
    for g in range(1, G + 1):
        costs = [inst.cost(s) for s in _all_partitions(n) if len(s) == g and _feasible(inst, s)]
        if not costs:
            assert got[g] is None
            continue
        assert got[g] is not None and got[g].groups == g
        assert _feasible(inst, got[g].starts)
        assert got[g].cost == pytest.approx(min(costs), rel=1e-9, abs=1e-9)
        assert inst.cost(got[g].starts) == pytest.approx(got[g].cost, rel=1e-9, abs=1e-9)


@pytest.mark.parametrize("seed", [*range(6), *(pytest.param(s, marks=pytest.mark.slow) for s in range(6, 40))])
def test_priced_equals_brute_force(seed):
    rng = np.random.default_rng(100 + seed)
    n = int(rng.integers(1, 11))
    p, q, rows = _random(rng, n)
    m = float(rng.choice([0, 1, 5]))
    inst = instance(p, q, rows, float(rng.integers(0, 3)), 10.0, 1.0, m)
    price = float(rng.choice([0.0, 1.0, 10.0, 100.0]))
    cut, value = best_priced(inst, price)
    values = [inst.cost(s) + price * len(s) for s in _all_partitions(n) if _feasible(inst, s)]
    assert _feasible(inst, cut.starts)
    assert value == pytest.approx(min(values), rel=1e-9, abs=1e-9)
    assert cut.cost + price * cut.groups == pytest.approx(value, rel=1e-9, abs=1e-9)


@pytest.mark.parametrize("n", [300, 2000])
@pytest.mark.parametrize("seed", range(3))
def test_layers_equal_plain_recurrence(seed, n):
    rng = np.random.default_rng(200 + seed)
    p, q, rows = _random(rng, n)
    inst = instance(p, q, rows, 2.0, 30.0, 2.0, float(rng.choice([0, 20, 60])))
    G = 12
    plain = _plain(inst, G)
    got = best_by_count(inst, G)
    for g in range(1, G + 1):
        if not np.isfinite(plain[g]):
            assert got[g] is None
        else:
            assert got[g].cost == pytest.approx(plain[g], rel=1e-9)


@pytest.mark.parametrize("seed", range(6))
def test_within_budget_matches_layers(seed):
    """The priced search under a budget never beats the exact layered optimum, and its bound
    never exceeds it."""
    rng = np.random.default_rng(300 + seed)
    n = 400
    p, q, rows = _random(rng, n)
    inst = instance(p, q, rows, 0.0, 50.0, 1.0, 10.0)
    exact = best_by_count(inst, 20)
    for G in (2, 5, 9, 20):
        opt = min(c.cost for c in exact[1 : G + 1] if c is not None)
        cut, bound = best_within(inst, G)
        assert cut.groups <= G
        assert cut.cost >= opt * (1 - 1e-9)
        assert bound <= opt * (1 + 1e-9)


@pytest.mark.parametrize("seed", range(20))
def test_scans_equal_brute_force(seed):
    """Range scans read every group their [lo, hi] overlaps: the exact optimum with scans matches
    brute force whose cost counts, per scan, each overlapping group directly."""
    rng = np.random.default_rng(500 + seed)
    n = int(rng.integers(2, 10))
    p, q, rows = _random(rng, n)
    k = int(rng.integers(1, 6))
    first = rng.integers(0, n + 1, k)
    last = np.array([int(rng.integers(f - 1, n)) for f in first])  # first - 1 means no key inside
    w = rng.uniform(0.5, 5, k)
    inst = instance(p, q, rows, 0.0, 3.0, 1.0, 0.0, (first, last, w))
    S = inst.S

    def direct(starts):
        ends = np.append(starts[1:], n)
        total = 0.0
        for i, j in zip(starts, ends, strict=True):
            c = 3.0 + (S[j] - S[i])
            total += c * (p[i:j].sum() + q[i + 1 : j].sum())
            total += c * sum(wt for f, la, wt in zip(first, last, w, strict=True) if i <= la and j - 1 >= f)
        return total

    got = best_by_count(inst, n)
    for g in range(1, n + 1):
        costs = [direct(s) for s in _all_partitions(n) if len(s) == g]
        assert got[g].cost == pytest.approx(min(costs), rel=1e-9)


@pytest.mark.parametrize("seed", range(20))
def test_row_level_evaluator_agrees_with_the_optimiser_cost(seed):
    """plan.group_reads (any row cut, written for files) and Instance.cost (key-aligned cuts, what
    the optimiser minimises) give the same bytes on key-aligned cuts, scans included."""
    from advisor.histogram import Histogram
    from advisor.rowgroups.plan import Traffic, group_reads

    rng = np.random.default_rng(700 + seed)
    n = int(rng.integers(2, 40))
    p, q, rows = _random(rng, n)
    k = int(rng.integers(0, 6))
    first = rng.integers(0, n + 1, k)
    last = np.array([int(rng.integers(f - 1, n)) for f in first], dtype=np.int64)
    w = rng.uniform(0.5, 5, k)
    tail = float(rng.integers(0, 3))
    inst = instance(p, q, rows, tail, 7.0, 2.0, 0.0, (first, last, w) if k else None)
    cuts = np.sort(rng.choice(np.arange(1, n), size=int(rng.integers(0, n - 1)), replace=False))
    starts = np.concatenate([[0], cuts]).astype(np.int64)
    bounds = np.append(inst.S[starts], inst.S[-1] + tail)
    per_group = 7.0 + 2.0 * np.diff(bounds)
    traffic = Traffic(Histogram(p, q), first.astype(np.int64), last, w)
    assert group_reads(traffic, inst.S, bounds, per_group) == pytest.approx(inst.cost(starts), rel=1e-9, abs=1e-9)
