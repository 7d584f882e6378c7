"""How close the near-optimal path gets to the exact optimum where both can run.

Run: .venv/bin/python benchmarks/bench_quality.py [--n 2000]
For each seeded workload and capacities giving the even split 3-5 levels, prints the exact
optimum, each near-optimal construction, the planner's pick (exact forbidden) and the bounds,
all as ratios to the optimum. Results: benchmarks/results/quality.txt.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))
from gen import WORKLOADS, popularity  # noqa: E402

from advisor.budget import BudgetSpec  # noqa: E402
from advisor.histogram import Histogram  # noqa: E402
from advisor.layout import evaluate  # noqa: E402
from advisor.optimize import lower_bounds, min_height, solve_exact, uniform_layout  # noqa: E402
from advisor.planner import PlanOptions, near_candidates, plan_capacity  # noqa: E402


def histogram(kind: str, n: int, lookups: int, seed: int = 1) -> Histogram:
    rng = np.random.default_rng(seed)
    prob = popularity(kind, n, rng)
    miss = 0.10 if "misses10" in kind else 0.02
    p = rng.multinomial(int(lookups * (1 - miss)), prob).astype(float)
    q = rng.multinomial(int(lookups * miss), np.full(n + 1, 1.0 / (n + 1))).astype(float)
    return Histogram(p, q)


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--n", type=int, default=2000)
    ap.add_argument("--caps", type=int, nargs="*", default=[3, 5, 7, 12, 20])
    ap.add_argument("--workloads", nargs="*", default=list(WORKLOADS))
    args = ap.parse_args()
    n = args.n
    names = [name for name, _ in near_candidates(Histogram(np.ones(1), np.ones(2)), 1)]
    abbrev = {
        "weight-balanced": "bal",
        "weight-balanced, spread 0.1": "bal.1",
        "hot-first": "hot",
        "hot-first, one level more at the root": "hot+1r",
        "hot-first, one level more everywhere": "hot+1e",
        "heaviest keys first": "greedy",
        "weight-balanced, heaviest key near each cut": "balH",
    }
    short = [abbrev.get(nm, nm[:7]) for nm in names]
    print(f"n = {n:,}; figures are expected page reads / exact optimum - 1, in %")
    print("columns: " + "; ".join(f"{s} = {nm}" for s, nm in zip(short, names, strict=False)))
    print("planner = the planner's pick with the exact DP forbidden and no budget (--max-pages none);")
    print("level, runs, entropy = lower bounds")
    head = (
        f"{'workload':<20} {'c':>3} {'h':>2} {'opt':>6} {'exact s':>7} {'even':>6} "
        + " ".join(f"{s:>7}" for s in short)
        + f" {'planner':>8} {'plan s':>6} {'level':>6} {'runs':>6} {'entropy':>8}"
    )
    print(head)
    print("-" * len(head))
    for kind in args.workloads:
        for c in args.caps:
            h = histogram(kind, n, 100 * n)
            t0 = time.perf_counter()
            opt = solve_exact(h, c).objective
            t_exact = time.perf_counter() - t0
            rel = lambda x, opt=opt: 100 * (x / opt - 1)  # noqa: E731
            cells = [rel(evaluate(build(), h).expected_page_reads) for _, build in near_candidates(h, c)]
            t0 = time.perf_counter()
            plan = plan_capacity(h, c, options=PlanOptions(exact_seconds=0, budget=BudgetSpec("none", "none")))
            t_plan = time.perf_counter() - t0
            b = lower_bounds(h, c)
            print(
                f"{kind:<20} {c:>3} {min_height(n, c):>2} {opt:>6.3f} {t_exact:>7.1f} "
                f"{rel(evaluate(uniform_layout(n, c), h).expected_page_reads):>6.1f} "
                + " ".join(f"{x:>7.1f}" for x in cells)
                + f" {rel(plan.recommended_cost.expected_page_reads):>8.2f} {t_plan:>6.2f} "
                f"{rel(b['level_capacity']):>6.1f} {rel(b['root_runs']):>6.1f} {rel(b['entropy']):>8.1f}",
                flush=True,
            )


if __name__ == "__main__":
    main()
