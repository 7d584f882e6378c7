"""The reads-space frontier: the same plan at growing page budgets.

For each capacity the plan is re-run with the page limit at the even split's count, 1.1x,
1.25x, 1.5x, 2x and no limit (the height limit of the run is kept), so an engineer sees what
each step of extra space buys before choosing one. A layout within a smaller budget is also
within every larger one, so each point keeps the best layout found so far: more budget never
shows more reads.
"""

from __future__ import annotations

from dataclasses import replace

from .budget import BudgetSpec
from .histogram import Histogram
from .layout import mean_fill
from .planner import Plan, PlanOptions, plan_capacity, restricted_ops

FRONTIER_PAGES = ("even", "1.1x", "1.25x", "1.5x", "2x", "none")


def frontier(plan: Plan, hist: Histogram, options: PlanOptions, points=FRONTIER_PAGES) -> list[dict]:
    """One row per page budget, ordered by budget: pages, bytes, fill, height, reads, tail, bound."""
    rows: list[dict] = []
    best = None
    for spec in points:
        budget_spec = BudgetSpec(spec, options.budget.height)
        if budget_spec == options.budget:
            point = plan  # the run's own plan: not planned twice
        else:
            # each further point gets a share of the run's exact-solver and re-solve time
            share = replace(
                options,
                budget=budget_spec,
                exact_seconds=options.exact_seconds / len(points),
                within_polish_ops=options.within_polish_ops / len(points),
                within_restricted_ops=restricted_ops(options) / len(points),
                quick=True,
            )
            point = plan_capacity(
                hist,
                plan.keys_per_page,
                plan.geometry,
                share,
                known_bounds=plan.bounds,
                known_even=(plan.uniform, plan.uniform_cost),
            )
        layout, cost, bound = point.recommended, point.recommended_cost, point.lower_bound
        if best is not None and best[1].expected_page_reads < cost.expected_page_reads:
            layout, cost = best  # a smaller budget's layout fits this one too
        best = (layout, cost)
        size = plan.page_size
        rows.append(
            {
                "max_pages_rule": spec,
                "max_pages": point.budget.max_pages,
                "max_height": point.budget.max_height,
                "expected_page_reads": float(cost.expected_page_reads),
                "saving": (plan.uniform_cost.expected_page_reads - cost.expected_page_reads)
                / plan.uniform_cost.expected_page_reads
                if plan.uniform_cost.expected_page_reads > 0
                else 0.0,
                "pages": int(cost.pages),
                "bytes": int(cost.pages) * size if size else None,
                "mean_fill": mean_fill(layout),
                "height": int(cost.height),
                "p99_page_reads": int(cost.p99_page_reads),
                "max_page_reads": int(cost.max_page_reads),
                "lower_bound": float(min(bound, cost.expected_page_reads)),
            }
        )
    return rows


def check_monotone(rows: list[dict]) -> bool:
    """More budget never gives more reads (a self-check the tests also run)."""
    reads = [r["expected_page_reads"] for r in rows]
    return all(b <= a + 1e-12 for a, b in zip(reads, reads[1:], strict=False))


__all__ = ["FRONTIER_PAGES", "check_monotone", "frontier"]
