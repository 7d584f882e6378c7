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
