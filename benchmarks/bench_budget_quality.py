"""Near-optimal path vs the exact optimum within the default budget (the even split's pages and
height), where the exact budgeted DP can run.

Run: .venv/bin/python benchmarks/bench_budget_quality.py [--n 1000] [--caps 3 5 12 20]
For each seeded workload and capacity: the even split, the exact DP with a price per page
(bisection; "proven" when its tree meets the Lagrangian dual bound, i.e. it is the exact
optimum within the budget), and the planner's pick with the exact DP forbidden (no memory for its tables; every
other step, the whole-tree re-solve included, keeps its default time), as expected
page reads and as % above the exact point. Results: benchmarks/results/budget-quality.txt.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))
from bench_quality import histogram  # noqa: E402
from gen import WORKLOADS  # noqa: E402

from advisor.layout import evaluate  # noqa: E402
from advisor.optimize.bplus_restricted import bplus_restricted_resolve  # noqa: E402
from advisor.optimize.constrained import solve_within  # noqa: E402
from advisor.planner import PlanOptions, plan_capacity  # noqa: E402


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--n", type=int, default=1000)
    ap.add_argument("--caps", type=int, nargs="*", default=[3, 5, 12, 20])
    ap.add_argument("--workloads", nargs="*", default=list(WORKLOADS))
    ap.add_argument("--model", choices=["btree", "bplus"], default="btree")
    args = ap.parse_args()
    n = args.n
    print(f"n = {n:,}, model {args.model}; budget: the even split's pages and levels; reads = page reads per lookup")
    head = (
        f"{'workload':<20} {'c':>3} {'pages':>6} {'lv':>3} {'even':>7} {'exact':>7} {'proven':>6} {'exact s':>7} "
        f"{'near':>7} {'near s':>6} {'near %':>7} {'saved %':>7}"
    )
    print(head)
    print("-" * len(head))
    worst = 0.0
    for kind in args.workloads:
        for c in args.caps:
            h = histogram(kind, n, 100 * n)
            opts = PlanOptions(exact_max_bytes=0, model=args.model, fanout=c + 1 if args.model == "bplus" else 0)
            t0 = time.perf_counter()
            plan = plan_capacity(h, c, options=opts)
            t_near = time.perf_counter() - t0
            even = plan.uniform
            height = int(even.depths().max())
            t0 = time.perf_counter()
            if args.model == "bplus":  # every boundary a candidate: the exact budgeted B+ DP, banded
                ex = bplus_restricted_resolve(even, h, even.pages, height, ops=np.inf)
            else:
                ex = solve_within(h, c, even.pages, height)
            t_exact = time.perf_counter() - t0
            near = plan.recommended_cost.expected_page_reads
            e = evaluate(even, h).expected_page_reads
            above = 100 * (near / ex.expected_page_reads - 1)
            worst = max(worst, above)
            print(
                f"{kind:<20} {c:>3} {even.pages:>6} {height:>3} {e:>7.3f} {ex.expected_page_reads:>7.3f} "
                f"{str(ex.proven):>6} {t_exact:>7.1f} {near:>7.3f} {t_near:>6.2f} {above:>7.2f} "
                f"{100 * (1 - near / e):>7.1f}",
                flush=True,
            )
    print(f"largest near-optimal excess over the exact point: {worst:.2f}%")


if __name__ == "__main__":
    main()
