"""Compiled kernels side by side with the plain code they replace, in one run (ratios).

Run: .venv/bin/python benchmarks/bench_kernels.py
- LRU replay: numba linked-list kernel vs the OrderedDict loop, 1M and 5M page accesses.
- Budgeted root-page choice: numba Fenwick kernel vs the plain numpy version, on root pages of a
  1M-key budgeted build (c = 168) and of a 20,000-key one (c = 12).
The first call of each kernel includes its compile time (or the cache load) and is shown apart.
Results: benchmarks/results/kernels.txt.
"""

from __future__ import annotations

import time

import numpy as np

from advisor.bufferpool import Replay, lru_misses, lru_plain
from advisor.optimize import uniform_layout
from advisor.optimize.within import capacity_of, choose, choose_plain


def timed(fn, *args):
    t0 = time.perf_counter()
    out = fn(*args)
    return out, time.perf_counter() - t0


def repeat(fn, args, times):
    return [fn(*args) for _ in range(times)]


def main() -> None:
    rng = np.random.default_rng(1)
    print(f"{'kernel':<34} {'size':>12} {'plain s':>9} {'compiled s':>11} {'ratio':>7} {'first call s':>13}")
    n = 200_000
    layout = uniform_layout(n, 168)
    for lookups in (1_000_000, 5_000_000):
        ids = (rng.zipf(1.1, lookups) - 1) % n
        replay = Replay(ids.astype(np.int64), n)
        sizes = [1, 12, 120, 1200]
        _, first = timed(lru_misses, layout, Replay(ids[:10].astype(np.int64), n), sizes)
        fast, t_fast = timed(lru_misses, layout, replay, sizes)
        slow, t_slow = timed(lru_plain, layout, replay, sizes)
        assert fast == slow
        accesses = lookups * 3 * len(sizes)
        print(
            f"{'LRU replay, pools of 1..1200 pages':<34} {accesses:>12,} {t_slow:>9.2f} {t_fast:>11.3f} "
            f"{t_slow / t_fast:>7.1f} {first:>13.2f}   ({accesses / t_fast / 1e6:.0f}M accesses/s compiled)"
        )
    for size, c in ((1_000_000, 168), (20_000, 12)):
        local = rng.random(size) ** 8
        order = np.argsort(-local)[: 4 * c]
        sub = min(capacity_of(c, 2), size + 1)
        budget = -(-size // c) + 3
        _, first = timed(choose, local, order, size, c, sub, budget)
        reps = 20
        call = (local, order, size, c, sub, budget)
        _, t_fast = timed(repeat, choose, call, reps)
        _, t_slow = timed(repeat, choose_plain, call, reps)
        print(
            f"{f'root-page choice, c = {c}, x{reps}':<34} {size:>12,} {t_slow:>9.2f} {t_fast:>11.3f} "
            f"{t_slow / t_fast:>7.1f} {first:>13.2f}"
        )


if __name__ == "__main__":
    main()
