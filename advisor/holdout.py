"""Held-out replay: fit on the earlier part of the log, judge on the later part.

A plan fitted to one window of traffic can overfit it. Planning on the first 80% (by the log's
order column) and costing both layouts on the last 20% shows how much of the saving survives
drift; smoothing the fitted histogram (see ``Histogram.smoothed``) trades in-sample saving for
held-out robustness, and the table shows both.
"""

from __future__ import annotations

from dataclasses import replace

from .geometry import Geometry
from .histogram import Histogram
from .layout import evaluate
from .planner import PlanOptions, plan_capacity, restricted_ops, saving


def holdout_rows(
    train: Histogram,
    test: Histogram,
    targets: list[tuple[int, Geometry | None]],
    smoothings: list[float],
    base: PlanOptions | None = None,
) -> list[dict]:
    """One row per capacity and smoothing: reads and savings in sample (train) and held out (test)."""
    rows = []
    for c, g in targets:
        for alpha in smoothings:
            base_opts = base or PlanOptions()
            # every other setting of the run kept; the whole-tree re-solve gets a quarter of its work
            opts = replace(base_opts, smoothing=alpha, within_restricted_ops=restricted_ops(base_opts) / 4)
            plan = plan_capacity(train, c, g, opts)
            ins_u, ins_o = plan.uniform_cost.expected_page_reads, plan.recommended_cost.expected_page_reads
            out_u = evaluate(plan.uniform, test).expected_page_reads
            out_o = evaluate(plan.recommended, test).expected_page_reads
            rows.append(
                {
                    "keys_per_page": c,
                    "page_size": g.page_size if g else None,
                    "smoothing": alpha,
                    "model": opts.model,
                    "in_sample": {"uniform": ins_u, "optimized": ins_o, "saving": saving(ins_u, ins_o)},
                    "held_out": {"uniform": out_u, "optimized": out_o, "saving": saving(out_u, out_o)},
                }
            )
    return rows
