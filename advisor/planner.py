"""One plan per capacity: the recommended layout, the uniform baseline, and the bound.

The planner runs the exact DP when its estimated work fits the budget, otherwise the best of
several near-optimal candidates (the uniform split among them, so a plan is never worse than
the baseline). Every figure comes from :func:`advisor.layout.evaluate`.
"""

from __future__ import annotations

import time
from dataclasses import dataclass
from typing import Callable

from .geometry import Geometry
from .histogram import Histogram
from .layout import Cost, Layout, check_layout, evaluate
from .errors import SettingInvalid
from .optimize import balanced_layout, exact_seconds, exact_work, heaviest_first_layout, integer_weights, hot_first_layout, lower_bounds, polish, solve_exact, uniform_layout
from .optimize.recut import recut
from .optimize.bplus import (
    balanced_bplus, bplus_chain, bplus_level_bound, bplus_window_bound, bplus_work, full_leaves_balanced, full_leaves_exact, hot_first_bplus,
    leaf_count,
    solve_bplus_exact, uniform_bplus,
)  # fmt: skip

OPS_PER_SECOND = 3e8  # element operations of the float64 B+ DP per second, measured on this machine kind
EXACT_SECONDS = 5.0  # run the exact DP when it should take about 5 s or less
EXACT_MAX_BYTES = 2.0e9


def near_candidates(hist: Histogram, c: int, model: str = "btree", fanout: int = 0, opts=None):
    """(name, builder) of every near-optimal construction the planner tries."""
    if model == "bplus":
        leaves = leaf_count(hist.n, c)
        if bplus_work(leaves, fanout) / OPS_PER_SECOND <= (opts.exact_seconds if opts else EXACT_SECONDS):
            yield "full leaves, exact internal pages", lambda: full_leaves_exact(hist, c, fanout)
        yield "hot keys in leaves of their own", lambda: hot_first_bplus(hist, c, fanout, 0)
        yield "hot keys in leaves of their own, one level more", lambda: hot_first_bplus(hist, c, fanout, 1)
        yield "full leaves, weight-balanced internal pages", lambda: full_leaves_balanced(hist, c, fanout)
        yield "weight-balanced leaves", lambda: balanced_bplus(hist, c, fanout, 0.1)
        yield "weight-balanced leaves, spread 1", lambda: balanced_bplus(hist, c, fanout, 1.0)
        return
    yield "weight-balanced", lambda: balanced_layout(hist, c, 0.0)
    yield "weight-balanced, spread 0.1", lambda: balanced_layout(hist, c, 0.1)
    yield "weight-balanced, heaviest key near each cut", lambda: balanced_layout(hist, c, 0.0, pick_heaviest=True)
    yield "hot-first", lambda: hot_first_layout(hist, c, 0)
    yield "hot-first, one level more at the root", lambda: hot_first_layout(hist, c, 1)
    yield "hot-first, one level more everywhere", lambda: hot_first_layout(hist, c, 1, everywhere=True)
    yield "heaviest keys first", lambda: heaviest_first_layout(hist, c)

PROOF_TOLERANCE = 1e-9
POLISH_TOP = 2


def saving(uniform: float, advised: float) -> float:
    """Fraction of the even split's page reads a layout saves (0 when nothing is read)."""
    return (uniform - advised) / uniform if uniform > 0 else 0.0


@dataclass(frozen=True)
class Plan:
    """Recommended and uniform layouts for one capacity, with their costs and a lower bound."""

    keys_per_page: int
    geometry: Geometry | None
    recommended: Layout
    recommended_cost: Cost
    uniform: Layout
    uniform_cost: Cost
    bounds: dict
    proven_optimal: bool
    method: str
    seconds: float
    dp_objective: float | None = None
    model: str = "btree"
    fanout: int = 0

    @property
    def page_size(self) -> int | None:
        return self.geometry.page_size if self.geometry else None

    @property
    def lower_bound(self) -> float:
        return max(self.bounds.values()) if self.bounds else 0.0

    @property
    def saving(self) -> float:
        """Fraction of the uniform layout's page reads the recommendation saves."""
        return saving(self.uniform_cost.expected_page_reads, self.recommended_cost.expected_page_reads)

    @property
    def gap(self) -> float:
        """(recommended - lower bound) / lower bound: how far from optimal it can be at most."""
        lb = self.lower_bound
        return (self.recommended_cost.expected_page_reads - lb) / lb if lb > 0 else 0.0


@dataclass
class PlanOptions:
    exact_seconds: float = EXACT_SECONDS  # estimated run time the exact DP may take
    exact_max_bytes: float = EXACT_MAX_BYTES
    polish_ops: float = 3e8  # exact DP work spent re-solving small subtrees of a near plan
    recut_ops: float = 3e9  # exact DP work spent re-cutting windows of page keys (classic B-tree)
    smoothing: float = 0.0  # plan on hist.smoothed(smoothing); costs are always on the raw histogram
    model: str = "btree"  # or "bplus" (keys only in leaves, variable depth)
    fanout: int = 0  # bplus with a direct capacity: children per internal page
    check: bool = True


def plan_capacity(
    hist: Histogram,
    c: int,
    geometry: Geometry | None = None,
    options: PlanOptions | None = None,
    on_step: Callable[[str], None] | None = None,
) -> Plan:
    """Plan one capacity ``c``: exact when affordable, else near-optimal with a bound."""
    opts = options or PlanOptions()
    step = on_step or (lambda _s: None)
    fit = hist.smoothed(opts.smoothing)  # the weights the layout is fitted to
    t0 = time.perf_counter()
    bplus = opts.model == "bplus"
    F = (geometry.fanout if geometry else opts.fanout) if bplus else 0
    if bplus and F < 2:
        raise SettingInvalid("a B+-tree plan needs a fanout of at least 2 (give --fanout with --keys-per-page)")
    if bplus:
        uni = uniform_bplus(hist.n, c, F)
        seconds = bplus_work(hist.n, F) / OPS_PER_SECOND if hist.n > c else 0.0
        mem = (2 * len(bplus_chain(F)) + 4) * (hist.n + 1) ** 2 * 8.0 if hist.n > c else 0.0
        solve = lambda h: solve_bplus_exact(h, c, F)  # noqa: E731
    else:
        uni = uniform_layout(hist.n, c)
        integer = integer_weights(fit, c)
        seconds, mem = exact_seconds(hist.n, c, integer), exact_work(hist.n, c, integer)[1]
        solve = lambda h: solve_exact(h, c)  # noqa: E731
    uni_cost = evaluate(uni, hist)
    dp_objective = None
    if hist.total <= 0:
        # nothing is looked up: every layout costs 0, so keep the layout the loader would build
        best, best_cost, method, proven = uni, uni_cost, "no lookups: even split kept", True
    elif seconds <= opts.exact_seconds and mem <= opts.exact_max_bytes:
        step("exact")
        res = solve(fit)
        best, method, proven = res.layout, "exact DP", opts.smoothing <= 0
        dp_objective = res.objective if opts.smoothing <= 0 else None
        best_cost = evaluate(best, hist)
        if opts.smoothing > 0:
            method += f" on smoothed weights (alpha {opts.smoothing:g})"
    else:
        ranked = [(evaluate(uni, fit).expected_page_reads, "even split (nothing better found)", uni)]
        for name, build in near_candidates(fit, c, opts.model, F, opts):
            step(name)
            cand = build()
            ranked.append((evaluate(cand, fit).expected_page_reads, name, cand))
        ranked.sort(key=lambda x: x[0])
        best_value, method, best = ranked[0]
        if opts.polish_ops > 0:
            # the best before re-solving small subtrees need not be the best after: try the top two
            for value, name, cand in ranked[:POLISH_TOP]:
                if cand is uni:
                    continue
                step(f"exact re-solve of small subtrees ({name})")
                polished = polish(cand, fit, opts.polish_ops / POLISH_TOP)
                v = evaluate(polished, fit).expected_page_reads
                if v < best_value:
                    best_value, method, best = v, name + " + exact small subtrees", polished
        if opts.recut_ops > 0 and not bplus and best is not uni:
            step("exact re-cuts of page keys")
            cut = recut(best, fit, opts.recut_ops)
            v = evaluate(cut, fit).expected_page_reads
            if v < best_value:
                best_value, method, best = v, method + " + exact re-cuts", cut
        best_cost = evaluate(best, hist)
        proven = False
    if opts.check:
        check_layout(best)
        check_layout(uni)
    step("bounds")
    if bplus:
        bounds = {"level_capacity": bplus_level_bound(hist, c, F), "leaf_runs": bplus_window_bound(hist, c, F)}
    else:
        bounds = lower_bounds(hist, c)
    lb = max(bounds.values())
    if not proven and best_cost.expected_page_reads <= lb * (1 + PROOF_TOLERANCE):
        proven, method = True, method + ", meets the lower bound"
    return Plan(
        keys_per_page=c,
        geometry=geometry,
        recommended=best,
        recommended_cost=best_cost,
        uniform=uni,
        uniform_cost=uni_cost,
        bounds=bounds,
        proven_optimal=proven,
        method=method,
        seconds=time.perf_counter() - t0,
        dp_objective=dp_objective,
        model=opts.model,
        fanout=F,
    )
