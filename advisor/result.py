"""The typed result of a run: one frozen record per plan and one for the run.

:func:`advisor.advise.analyse` builds these (never a dict patched section by section), and the
JSON contract is derived from them in one place, :meth:`RunResult.to_json`; the report renders
that JSON dict, so the screen and the machine-readable output cannot disagree.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

from .headline import advice_items, drift_warnings
from .histogram import Histogram
from .pagesize import best_choice
from .planner import Plan
from .serialize import plan_dict, run_dict


@dataclass(frozen=True)
class PlanResult:
    """One plan and every figure measured on it (None: not asked for in this run)."""

    plan: Plan
    buffer_pool: list[dict] = field(default_factory=list)  # pinned and LRU misses per pool size
    pool_equivalent: dict | None = None  # the advice in buffer-pool terms
    frontier: list[dict] | None = None  # the plan at growing page budgets
    balanced: dict | None = None  # B+-tree: the one-depth-leaves shape for the pool
    range_scans: dict | None = None  # pages per range scan, point lookups vs scans

    def to_json(self) -> dict:
        out = plan_dict(self.plan) | {"buffer_pool": self.buffer_pool}
        for name in ("pool_equivalent", "frontier", "balanced", "range_scans"):
            value = getattr(self, name)
            if value is not None:
                out[name] = value
        return out


@dataclass(frozen=True)
class HoldoutResult:
    """Fit on the earlier share of the log, judged on the later (rows per capacity and smoothing)."""

    fraction: float
    train_lookups: float
    test_lookups: float
    rows: list[dict]

    def to_json(self) -> dict:
        return {
            "fraction": self.fraction,
            "train_lookups": self.train_lookups,
            "test_lookups": self.test_lookups,
            "rows": self.rows,
        }


@dataclass(frozen=True)
class RunResult:
    """Everything one run found: the plans of every structure and the run-wide figures."""

    hist: Histogram
    inputs: dict
    plans: tuple[PlanResult, ...]
    holdout: HoldoutResult | None = None
    page_size_choice: dict | None = None  # time per lookup per page size; the best marked
    current: dict | None = None  # the user's existing index (--current)
    pool_bytes: int | None = None  # the buffer pool the user named (--pool-bytes); None: not given

    def beside(self, other: RunResult) -> RunResult:
        """Two structures' runs of one workload as one run: plans, held-out and page-size rows joined."""
        holdout = self.holdout
        if holdout is not None and other.holdout is not None:
            holdout = replace(holdout, rows=holdout.rows + other.holdout.rows)
        choice = self.page_size_choice
        if choice is not None and other.page_size_choice is not None:
            rows = choice["rows"] + other.page_size_choice["rows"]
            choice = choice | {"rows": rows} | best_choice(rows)
        return replace(self, plans=self.plans + other.plans, holdout=holdout, page_size_choice=choice)

    def to_json(self) -> dict:
        """The JSON contract (documented in :mod:`advisor.serialize`): the one place it is built."""
        run = run_dict(self.hist, [p.plan for p in self.plans], self.inputs)
        run["plans"] = [p.to_json() for p in self.plans]
        if self.holdout is not None:
            run["holdout"] = self.holdout.to_json()
        if self.page_size_choice is not None:
            run["page_size_choice"] = self.page_size_choice
        if self.current is not None:
            run["current"] = self.current
        run["advice"] = advice_items(run, self.pool_bytes)
        run["warnings"] = run["warnings"] + drift_warnings(run)
        return run
