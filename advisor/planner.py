"""One plan per capacity: the recommended layout, the uniform baseline, and the bound.

The planner runs the exact DP when its estimated work fits the budget, otherwise the best of
several near-optimal candidates (the uniform split among them, so a plan is never worse than
the baseline). Every figure comes from :func:`advisor.layout.evaluate`.
"""

from __future__ import annotations

import time
from collections.abc import Callable
from dataclasses import dataclass, field

from .budget import Budget, BudgetSpec, resolve
from .errors import SettingInvalid
from .geometry import Geometry
from .histogram import Histogram
from .layout import Cost, Layout, check_layout, evaluate
from .optimize import (
    balanced_layout,
    exact_seconds,
    exact_work,
    heaviest_first_layout,
    hot_first_layout,
    integer_weights,
    lower_bounds,
    polish,
    solve_exact,
    uniform_layout,
)
from .optimize.bplus import (
    balanced_bplus,
    bplus_chain,
    bplus_height,
    bplus_level_bound,
    bplus_window_bound,
    bplus_work,
    full_leaves_balanced,
    full_leaves_exact,
    hot_first_bplus,
    leaf_count,
    solve_bplus_exact,
    uniform_bplus,
)
from .optimize.bplus_constrained import bplus_constrained_work, solve_bplus_within
from .optimize.bplus_within import bplus_within_layout, hot_leaf_candidates
from .optimize.constrained import constrained_bytes, constrained_work, solve_within
from .optimize.exact import FLOAT_OPS_PER_SECOND
from .optimize.recut import recut
from .optimize.refine import EVALUATIONS, polish_within
from .optimize.uniform import min_height
from .optimize.within import fewest_pages, within_budget_layout

OPS_PER_SECOND = 3e8  # element operations of the float64 B+ DP per second, measured on this machine kind
EXACT_SECONDS = 5.0  # run the exact DP when it should take about 5 s or less
EXACT_MAX_BYTES = 2.0e9
BPLUS_WITHIN_OPS_PER_SECOND = 1e8  # the budgeted B+ DP (plain numpy), measured: 300 keys, F = 8, ~0.25 s a run
BPLUS_WITHIN_MAX_KEYS = 1500  # its tables are (n + 1)^2 per forest size and level


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
LOOSE_BUDGET = 1.5  # page budgets from this many times the even split's pages also try the unconstrained builders
LOOSE_MAX_KEYS = (
    100_000  # ... below this many keys (beyond, their trees of many more pages rarely fit and cost seconds)
)
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
    budget: Budget = Budget(None, None)

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
    budget: BudgetSpec = field(default_factory=BudgetSpec)  # default: the even split's pages and height
    within_polish_ops: float = 1e9  # estimated work of exact re-solves within the budget (the estimate runs
    # 10-50x above the measured time: n = 1,000 took 0.2 s), and the most one subtree may take:
    within_subtree_ops: float = 5e8
    quick: bool = False  # a frontier point: large tables skip the slow unconstrained builders


def plan_capacity(
    hist: Histogram,
    c: int,
    geometry: Geometry | None = None,
    options: PlanOptions | None = None,
    on_step: Callable[[str], None] | None = None,
    known_bounds: dict | None = None,
) -> Plan:
    """Plan one capacity ``c``: exact when affordable, else near-optimal with a bound; every
    layout returned keeps within the budget of ``options.budget``. ``known_bounds``: the
    budget-free lower bounds of this histogram and capacity, when already computed."""
    opts = options or PlanOptions()
    step = on_step or (lambda _s: None)
    fit = hist.smoothed(opts.smoothing)  # the weights the layout is fitted to
    t0 = time.perf_counter()
    bplus = opts.model == "bplus"
    F = (geometry.fanout if geometry else opts.fanout) if bplus else 0
    if bplus and F < 2:
        raise SettingInvalid("a B+-tree plan needs a fanout of at least 2 (give --fanout with --keys-per-page)")
    uni = uniform_bplus(hist.n, c, F) if bplus else uniform_layout(hist.n, c)
    budget = plan_budget(opts.budget, uni, hist.n, c, F)
    uni_cost = evaluate(uni, hist)
    dual = None
    if hist.total <= 0:
        # nothing is looked up: every layout costs 0, so keep the layout the loader would build
        best, method, proven, dp_objective = uni, "no lookups: even split kept", True, None
    elif budget.max_pages is None and budget.max_height is None:
        best, method, proven, dp_objective = _unlimited(fit, c, F, uni, opts, step)
    else:
        best, method, proven, dual = _within(fit, c, F, uni, budget, opts, step)
        dp_objective = None
    best_cost = evaluate(best, hist)
    if opts.check:
        check_layout(best, budget)
        check_layout(uni)
    step("bounds")
    if known_bounds is not None:
        bounds = {k: v for k, v in known_bounds.items() if k != "within_budget"}
    elif bplus:
        bounds = {"level_capacity": bplus_level_bound(hist, c, F), "leaf_runs": bplus_window_bound(hist, c, F)}
    else:
        bounds = lower_bounds(hist, c)
    if dual is not None and opts.smoothing <= 0:
        bounds["within_budget"] = min(dual, best_cost.expected_page_reads)
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
        budget=budget,
    )


def plan_budget(spec: BudgetSpec, uni: Layout, n: int, c: int, F: int) -> Budget:
    """The plan's limits: ``spec`` against the even split and the least any layout needs."""
    if n == 0:
        return Budget(None, None)
    if uni.structure == "bplus":
        # fewer pages than the even split's full leaves under packed pages is not built here
        note = f"B+-tree plans keep at least the even split's {uni.pages} pages (fewer is not built)"
        return resolve(spec, uni, uni.pages, bplus_height(n, c, F), note)
    return resolve(spec, uni, fewest_pages(n, c), min_height(n, c))


def _unlimited(fit: Histogram, c: int, F: int, uni: Layout, opts: PlanOptions, step):
    """No budget: the unconstrained optimum, exact when affordable (the behaviour before budgets)."""
    bplus = uni.structure == "bplus"
    if bplus:
        seconds = bplus_work(fit.n, F) / OPS_PER_SECOND if fit.n > c else 0.0
        mem = (2 * len(bplus_chain(F)) + 4) * (fit.n + 1) ** 2 * 8.0 if fit.n > c else 0.0
    else:
        integer = integer_weights(fit, c)
        seconds, mem = exact_seconds(fit.n, c, integer), exact_work(fit.n, c, integer)[1]
    if seconds <= opts.exact_seconds and mem <= opts.exact_max_bytes:
        step("exact")
        res = solve_bplus_exact(fit, c, F) if bplus else solve_exact(fit, c)
        method = "exact DP" + (f" on smoothed weights (alpha {opts.smoothing:g})" if opts.smoothing > 0 else "")
        return res.layout, method, opts.smoothing <= 0, (res.objective if opts.smoothing <= 0 else None)
    ranked = [(evaluate(uni, fit).expected_page_reads, "even split (nothing better found)", uni)]
    for name, build in near_candidates(fit, c, opts.model, F, opts):
        step(name)
        cand = build()
        ranked.append((evaluate(cand, fit).expected_page_reads, name, cand))
    ranked.sort(key=lambda x: x[0])
    best_value, method, best = ranked[0]
    if opts.polish_ops > 0:
        # the best before re-solving small subtrees need not be the best after: try the top two
        for _value, name, cand in ranked[:POLISH_TOP]:
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
    return best, method, False, None


def _within(fit: Histogram, c: int, F: int, uni: Layout, budget: Budget, opts: PlanOptions, step):
    """Best layout found within the budget: (layout, method, proven, dual bound or None)."""
    n, bplus = fit.n, uni.structure == "bplus"
    if not bplus:
        height = budget.max_height if budget.max_height is not None else min(n, budget.max_pages or n)
        seconds = constrained_work(n, c, height) * EVALUATIONS / FLOAT_OPS_PER_SECOND
        if seconds <= opts.exact_seconds and constrained_bytes(n, c, height) <= opts.exact_max_bytes:
            step("exact within the budget")
            res = solve_within(fit, c, budget.max_pages, height)
            proven = res.proven and opts.smoothing <= 0
            method = "exact DP within the budget" if proven else "exact DP with a price per page (best point found)"
            return res.layout, method, proven, res.dual_bound
    else:
        height = budget.max_height if budget.max_height is not None else min(n, budget.max_pages or n)
        seconds = bplus_constrained_work(n, F, height) * EVALUATIONS / BPLUS_WITHIN_OPS_PER_SECOND
        if n <= BPLUS_WITHIN_MAX_KEYS and seconds <= opts.exact_seconds:
            step("exact within the budget")
            res = solve_bplus_within(fit, c, F, budget.max_pages, height)
            proven = res.proven and opts.smoothing <= 0
            method = "exact DP within the budget" if proven else "exact DP with a price per page (best point found)"
            return res.layout, method, proven, res.dual_bound
    ranked = [(evaluate(uni, fit).expected_page_reads, "even split (nothing better found)", uni)]
    for name, build in budget_candidates(fit, c, F, uni, budget, opts):
        step(name)
        cand = build()
        if budget.allows(cand):
            ranked.append((evaluate(cand, fit).expected_page_reads, name, cand))
    ranked.sort(key=lambda x: x[0])
    best_value, method, best = ranked[0]
    if opts.within_polish_ops > 0 and not bplus and not (opts.quick and n > LOOSE_MAX_KEYS):
        for _value, name, cand in ranked[:POLISH_TOP]:
            if cand is uni:
                continue
            step(f"exact re-solve of subtrees within the budget ({name})")
            polished = polish_within(
                cand,
                fit,
                budget.max_pages,
                budget.max_height,
                opts.within_polish_ops / POLISH_TOP,
                opts.within_subtree_ops,
            )
            v = evaluate(polished, fit).expected_page_reads
            if v < best_value and budget.allows(polished):
                best_value, method, best = v, name + " + exact subtrees", polished
    return best, method, False, None


def budget_candidates(fit: Histogram, c: int, F: int, uni: Layout, budget: Budget, opts: PlanOptions):
    """(name, builder) of the constructions tried within a budget; every result is checked
    against the budget before it is ranked."""
    n = fit.n
    if uni.structure == "btree":
        even_height = int(uni.depths().max())
        top = budget.max_height if budget.max_height is not None else even_height + 1
        pages = budget.max_pages if budget.max_pages is not None else n
        quick = opts.quick and n > LOOSE_MAX_KEYS
        heights = [top] if quick else sorted({top, max(min_height(n, c), top - 1)}, reverse=True)
        for h in heights:
            for tries in (4,) if quick else (1, 2, 4):
                yield (
                    f"hot keys lifted within the budget ({h} levels, {tries}c offered)",
                    lambda h=h, tries=tries: within_budget_layout(fit, c, pages, h, tries),
                )
    else:
        even_height = int(uni.depths().max())
        top = budget.max_height if budget.max_height is not None else even_height + 1
        pages = budget.max_pages if budget.max_pages is not None else 2 * uni.pages
        for starts in hot_leaf_candidates(fit, c, F, pages):
            label = "full leaves" if starts.size == leaf_count(n, c) else f"{starts.size:,} leaves, hot runs apart"
            for h in sorted({top, max(bplus_height(n, c, F), top - 1)}, reverse=True):
                yield (
                    f"hot leaves near the root within the budget ({label}, {h} levels)",
                    lambda s=starts, h=h: bplus_within_layout(fit, c, F, pages, h, s) or uni,
                )
    small = fit.n <= LOOSE_MAX_KEYS
    if (budget.max_pages is None and (small or not opts.quick)) or (
        budget.max_pages is not None and budget.max_pages >= LOOSE_BUDGET * uni.pages and small
    ):
        # the unconstrained constructions use many more pages than the even split; below a
        # loose budget they never fit, so they are not built
        yield from near_candidates(fit, c, opts.model, F, opts)
