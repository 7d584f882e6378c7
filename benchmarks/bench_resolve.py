"""What the whole-tree re-solve over candidate upper-page keys buys beyond n = 2,000, and what it
costs: the planner at the default budget with the re-solve off, on (default work: two thirds of what
``--exact-seconds 5`` buys per round) and on with ``--exact-seconds 15``, side by side in one run.

Run: .venv/bin/python benchmarks/bench_resolve.py [--sizes 5000 20000] [--caps 5 20 50]
Reads are expected page reads per lookup; "bound" is the planner's lower bound (so "gap %" is a
certified distance from the optimum within the budget). Results: benchmarks/results/resolve.txt.
"""

from __future__ import annotations

import argparse
import sys
import time
from dataclasses import replace
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
from bench_quality import histogram  # noqa: E402

from advisor.planner import PlanOptions, plan_capacity  # noqa: E402


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--sizes", type=int, nargs="*", default=[5000, 20000])
    ap.add_argument("--caps", type=int, nargs="*", default=[5, 20, 50])
    ap.add_argument("--workloads", nargs="*", default=["zipf1.0-scattered", "zipf1.0-clustered"])
    ap.add_argument("--models", nargs="*", default=["btree", "bplus"])
    args = ap.parse_args()
    head = (
        f"{'workload':<18} {'model':<5} {'n':>6} {'c':>3} {'even':>6} {'off':>6} {'off s':>6} {'on':>6} {'on s':>6} "
        f"{'fewer %':>7} {'bound':>6} {'gap off':>7} {'gap on':>7} {'on 15s':>6} {'s':>5} {'fewer %':>7}"
    )
    print(head)
    print("-" * len(head))
    for kind in args.workloads:
        for model in args.models:
            for n in args.sizes:
                for c in args.caps:
                    h = histogram(kind, n, 50 * n)
                    base = PlanOptions(model=model, fanout=c + 1 if model == "bplus" else 0)
                    out = []
                    for opts in (replace(base, within_restricted_ops=0.0), base, replace(base, exact_seconds=15.0)):
                        t0 = time.perf_counter()
                        plan = plan_capacity(h, c, options=opts)
                        out.append((plan, time.perf_counter() - t0))
                    (off, t_off), (on, t_on), (more, t_more) = out
                    r_more = more.recommended_cost.expected_page_reads
                    r_off, r_on = off.recommended_cost.expected_page_reads, on.recommended_cost.expected_page_reads
                    bound = max(off.lower_bound, on.lower_bound, more.lower_bound)
                    print(
                        f"{kind:<18} {model:<5} {n:>6} {c:>3} {off.uniform_cost.expected_page_reads:>6.3f} "
                        f"{r_off:>6.3f} {t_off:>6.1f} {r_on:>6.3f} {t_on:>6.1f} {100 * (1 - r_on / r_off):>7.2f} "
                        f"{bound:>6.3f} {100 * (r_off / bound - 1):>7.1f} {100 * (r_on / bound - 1):>7.1f} "
                        f"{r_more:>6.3f} {t_more:>5.1f} {100 * (1 - r_more / r_off):>7.2f}",
                        flush=True,
                    )


if __name__ == "__main__":
    main()
