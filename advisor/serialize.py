"""The machine-readable form of a run: one JSON-ready dict, a stable contract.

Guaranteed fields: ``keys``, ``lookups``, ``hits``, ``misses`` and ``plans``, each plan with
``keys_per_page``, ``page_size`` (null when the capacity was given directly), ``optimized`` and
``uniform`` (each ``expected_page_reads``, ``pages``, ``height``), ``lower_bound`` and
``proven_optimal``. Further fields may be added; none of these will change meaning.
"""

from __future__ import annotations

from .headline import DISCLAIMER, advice_items
from .histogram import Histogram
from .layout import Cost, Layout, mean_fill
from .planner import Plan

SCHEMA_VERSION = 1


def cost_dict(cost: Cost, layout: Layout | None = None, page_size: int | None = None) -> dict:
    """One layout's figures: reads, size (pages, bytes, fill) and tail (p99 and worst reads)."""
    out = {
        "expected_page_reads": float(cost.expected_page_reads),
        "pages": int(cost.pages),
        "height": int(cost.height),
        "answered_at_depth": [float(x) for x in cost.answered_at_depth],
        "bytes": int(cost.pages) * int(page_size) if page_size else None,
        "p99_page_reads": int(cost.p99_page_reads),
        "max_page_reads": int(cost.max_page_reads),
        "max_page_reads_any_key": int(cost.max_page_reads_any),
    }
    if layout is not None:
        out["mean_fill"] = mean_fill(layout)
        if layout.pages and layout.leaf is not None:
            out["leaf_depths"] = sorted({int(d) for d in layout.depths()[layout.leaf]})
    return out


def plan_dict(plan: Plan) -> dict:
    return {
        "keys_per_page": int(plan.keys_per_page),
        "page_size": plan.page_size,
        "model": plan.model,
        "fanout": int(plan.fanout) or None,  # a classic B-tree has no fanout of its own
        "even_fill": {"leaf": float(plan.leaf_fill), "internal": float(plan.internal_fill)},
        "geometry": plan.geometry.as_dict() if plan.geometry else None,
        "optimized": cost_dict(plan.recommended_cost, plan.recommended, plan.page_size) | {"method": plan.method},
        "uniform": cost_dict(plan.uniform_cost, plan.uniform, plan.page_size),
        "budget": plan.budget.as_dict(),
        "saving": float(plan.saving),
        "lower_bound": float(plan.lower_bound),
        "lower_bounds": {k: float(v) for k, v in plan.bounds.items()},
        "certified_gap": float(plan.gap),
        "proven_optimal": bool(plan.proven_optimal),
        "seconds": round(plan.seconds, 4),
    }


def _count(x: float) -> int | float:
    """Whole lookup counts as integers in the JSON (weights may be fractional with --count-column)."""
    x = float(x)
    return int(x) if x.is_integer() and abs(x) < 2**63 else x


def run_dict(
    hist: Histogram,
    plans: list[Plan],
    inputs: dict,
    exports: list[str] | None = None,
    pools: list[list[dict]] | None = None,
) -> dict:
    s = hist.summary()
    run = {
        "schema_version": SCHEMA_VERSION,
        "inputs": inputs,
        "keys": int(s["keys"]),
        "lookups": _count(s["lookups"]),
        "hits": _count(s["hits"]),
        "misses": _count(s["misses"]),
        "null_lookups": _count(s["null_lookups"]),
        "histogram": {k: v for k, v in s.items() if k not in ("keys", "lookups", "hits", "misses", "null_lookups")},
        "plans": [plan_dict(p) | ({"buffer_pool": pools[i]} if pools else {}) for i, p in enumerate(plans)],
        "exports": exports or [],
        "warnings": hist.warnings(),
        "advice": [],
        "disclaimer": DISCLAIMER,
    }
    # a run recomputes this once every section is measured (pool, held-out): RunResult.to_json
    run["advice"] = advice_items(run, None)
    return run
