"""Compiled kernels side by side with the plain code they replace, in one run (ratios).

Run: .venv/bin/python benchmarks/bench_kernels.py
- LRU replay: numba linked-list kernel vs the OrderedDict loop, 1M and 5M page accesses.
- Budgeted root-page choice: numba Fenwick kernel vs the plain numpy version, on root pages of a
  1M-key budgeted build (c = 168) and of a 20,000-key one (c = 12).
- The whole budgeted construction compiled (within_build) vs the plain top-down loop (same layout).
- The root-runs bound's loops compiled vs plain (same values), c = 168 and 680.
- The evaluator's passes compiled vs the numpy passes they replaced (same figures).
- Compile time on a new machine: a small plan in a fresh process with an empty numba cache, then
  the same with the cache it wrote (what every later run pays to load the kernels).
The first call of each kernel includes its compile time (or the cache load) and is shown apart.
Results: benchmarks/results/kernels.txt.
"""

from __future__ import annotations

import os
import subprocess
import sys
import tempfile
import time

import numpy as np

from advisor.bufferpool import Replay, lru_misses, lru_plain
from advisor.histogram import Histogram
from advisor.layout import Layout, evaluate
from advisor.optimize import uniform_layout
from advisor.optimize.bounds import runs_upper_plain
from advisor.optimize.runs_kernel import runs_upper
from advisor.optimize.uniform import min_height
from advisor.optimize.within import (
    capacity_of,
    choose,
    choose_plain,
    within_budget_layout,
    within_budget_layout_plain,
)

SMALL_PLAN = (
    "import numpy as np; from advisor.histogram import Histogram; from advisor.planner import plan_capacity; "
    "r = np.random.default_rng(1); h = Histogram(r.random(5000) ** 6, r.random(5001) * 0.01); "
    "plan_capacity(h, 40); plan_capacity(h, 40, options=__import__('advisor.planner').planner.PlanOptions("
    "exact_seconds=0))"
)


def evaluate_numpy(layout: Layout, hist: Histogram) -> float:
    """The evaluator's expected page reads as computed before its passes were compiled."""
    depth = layout.depths()
    n = layout.n_keys
    owner = np.repeat(np.arange(layout.pages), layout.page_sizes())
    key_page = np.empty(n, dtype=np.int64)
    key_page[layout.page_keys] = owner
    kd = depth[key_page]
    gap_page = np.empty(n + 1, dtype=np.int64)
    gap_page[0], gap_page[n] = key_page[0], key_page[n - 1]
    gap_page[1:n] = np.where(kd[:-1] >= kd[1:], key_page[:-1], key_page[1:])
    key_depth, gap_depth = kd.astype(np.int16), depth[gap_page].astype(np.int16)
    np.bincount(key_depth, weights=hist.p)
    np.bincount(gap_depth, weights=hist.q)
    return float((hist.p @ key_depth + hist.q @ gap_depth) / hist.total)


def compile_seconds() -> tuple[float, float]:
    """(cold, warm) wall seconds of a small plan in fresh processes sharing a new numba cache."""
    with tempfile.TemporaryDirectory() as cache:
        env = dict(os.environ, NUMBA_CACHE_DIR=cache)
        out = []
        for _ in range(2):
            t0 = time.perf_counter()
            subprocess.run([sys.executable, "-c", SMALL_PLAN], check=True, env=env)
            out.append(time.perf_counter() - t0)
    return out[0], out[1]


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

    n, c = 1_000_000, 168
    w = 1.0 / np.arange(1, n + 1)
    hist = Histogram(np.round(1e7 * w[rng.permutation(n)] / w.sum()), np.zeros(n + 1))
    height, pages = min_height(n, c), -(-n // c)
    _, first = timed(within_budget_layout, hist, c, pages, height, 2)
    fast, t_fast = timed(within_budget_layout, hist, c, pages, height, 2)
    slow, t_slow = timed(within_budget_layout_plain, hist, c, pages, height, 2)
    assert np.array_equal(fast.page_keys, slow.page_keys)
    print(
        f"{f'budgeted construction, c = {c}':<34} {n:>12,} {t_slow:>9.2f} {t_fast:>11.3f} "
        f"{t_slow / t_fast:>7.1f} {first:>13.2f}"
    )
    for c in (168, 680):
        m = 2 * c + 2
        hw = np.sort(rng.random(m))[::-1]
        adjacent = np.concatenate([[False], rng.random(m - 1) < 0.3])
        lambdas = np.unique(np.concatenate([[0.0], hw[:: max(1, m // 40)]]))
        args = (hw, adjacent, c, lambdas, c, float(hw[-1]))
        _, first = timed(runs_upper, *args)
        fast, t_fast = timed(runs_upper, *args)
        slow, t_slow = timed(runs_upper_plain, *args)
        assert np.array_equal(fast, slow)
        print(
            f"{f'root-runs bound loops, c = {c}':<34} {m:>12,} {t_slow:>9.2f} {t_fast:>11.3f} "
            f"{t_slow / t_fast:>7.1f} {first:>13.2f}"
        )
    n = 1_000_000
    hist = Histogram(rng.random(n), rng.random(n + 1))
    layout = within_budget_layout(hist, 168, -(-n // 168), min_height(n, 168), 2)
    _, first = timed(evaluate, layout, hist)
    reps = 10
    fast, t_fast = timed(repeat, evaluate, (layout, hist), reps)
    slow, t_slow = timed(repeat, evaluate_numpy, (layout, hist), reps)
    assert abs(fast[0].expected_page_reads - slow[0]) < 1e-9
    print(
        f"{f'evaluator, c = 168, x{reps}':<34} {n:>12,} {t_slow:>9.2f} {t_fast:>11.3f} "
        f"{t_slow / t_fast:>7.1f} {first:>13.2f}"
    )
    cold, warm = compile_seconds()
    print(f"small plan in a new process: {cold:.1f} s with an empty numba cache (compiling), {warm:.1f} s with it")


if __name__ == "__main__":
    main()
