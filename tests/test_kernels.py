"""Compiled kernels agree with the plain Python they replace."""

from __future__ import annotations

import numpy as np

from advisor.optimize.within import capacity_of, choose, choose_plain


def test_root_choice_kernel_equals_the_plain_version():
    rng = np.random.default_rng(11)
    for _ in range(400):
        c = int(rng.integers(1, 40))
        h = int(rng.integers(2, 4))
        size = int(rng.integers(c + 1, min(capacity_of(c, h), 3000) + 1))
        local = rng.random(size) ** 3
        local[rng.random(size) < 0.2] = 0
        order = np.argsort(-local, kind="stable")[: int(rng.integers(1, 3 * c + 2))]
        sub = capacity_of(c, h - 1)
        fewest = -(-size // c)
        budget = int(rng.integers(fewest, fewest + 6))
        want = choose_plain(local, order, size, c, min(sub, size + 1), budget)
        got = choose(local, order, size, c, min(sub, size + 1), budget)
        np.testing.assert_array_equal(got, want)


def test_compiled_construction_builds_the_plain_layout():
    """The whole budgeted construction compiled (within_build) against the plain one, page by
    page, over capacities, heights, budgets, offer counts and all three variants; weights with
    ties and zeros check that both break ties the same way (by key rank)."""
    from advisor.histogram import Histogram
    from advisor.optimize.uniform import min_height
    from advisor.optimize.within import fewest_pages, within_budget_layout, within_budget_layout_plain

    rng = np.random.default_rng(3)
    for it in range(150):
        c = int(rng.integers(1, 30))
        n = int(rng.integers(1, 2500))
        p = rng.random(n) ** 4
        if it % 3 == 1:
            p = np.round(p * 5)  # ties and zeros
        elif it % 3 == 2:
            p[:] = 1.0  # every key tied
        q = rng.random(n + 1) * (rng.random() < 0.5)
        hist = Histogram(p, q)
        h = min_height(n, c) + int(rng.integers(0, 3))
        pages = fewest_pages(n, c) + int(rng.integers(0, 3)) * int(rng.integers(0, n // c + 2))
        tries = int(rng.choice([1, 2, 4]))
        fill_first = bool(rng.random() < 0.3)
        hot_share = 0.25 if rng.random() < 0.3 else 1.0
        got = within_budget_layout(hist, c, pages, h, tries, fill_first, hot_share)
        want = within_budget_layout_plain(hist, c, pages, h, tries, fill_first, hot_share)
        for field in ("page_start", "page_keys", "parent", "slot"):
            np.testing.assert_array_equal(getattr(got, field), getattr(want, field))


def test_compiled_runs_bound_equals_the_plain_loops():
    from advisor.optimize.bounds import runs_upper_plain
    from advisor.optimize.runs_kernel import runs_upper

    rng = np.random.default_rng(1)
    for _ in range(200):
        c = int(rng.integers(1, 40))
        m = int(rng.integers(1, 2 * c + 3))
        hw = rng.random(m) ** 3
        adjacent = np.concatenate([[False], rng.random(m - 1) < 0.5])
        lambdas = np.unique(np.concatenate([[0.0], rng.random(5)]))
        light = int(rng.integers(0, c + 1))
        tau = float(rng.random() * 0.1)
        np.testing.assert_array_equal(
            runs_upper(hw, adjacent, c, lambdas, light, tau), runs_upper_plain(hw, adjacent, c, lambdas, light, tau)
        )
