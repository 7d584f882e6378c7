"""One plan per capacity: the recommended layout, the uniform baseline, and the bound.

Within a budget (the default: the even split's pages and levels) the planner runs the exact
budgeted DP when its estimated time fits, otherwise the best of the budgeted constructions
(the even split among them, so a plan is never worse than the baseline), refined by exact
re-solves of subtrees and exact re-cuts of page-key windows that keep within the budget, and
last by a whole-tree re-solve whose upper pages are drawn from candidate keys
(:mod:`advisor.optimize.restricted`; capped by ``--exact-seconds`` like the exact DP).
Without one, the unconstrained optimum as before. The tree family is a structure (:mod:`advisor.structures`);
every figure comes from :func:`advisor.layout.evaluate`.
"""

from __future__ import annotations

import os
import time
from collections import deque
from collections.abc import Callable
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field
from itertools import islice

from .budget import Budget, BudgetSpec, resolve
from .geometry import Geometry
from .histogram import Histogram
from .layout import Cost, Layout, check_layout, evaluate
from .optimize import polish
from .optimize.restricted import OPS_PER_SECOND as RESTRICTED_OPS_PER_SECOND
from .structures import BPlusTree, ClassicTree, structure_for

EXACT_SECONDS = 5.0  # run the exact DP when it should take about 5 s or less
EXACT_MAX_BYTES = 2.0e9


def near_candidates(hist: Histogram, c: int, model: str = "btree", fanout: int = 0, opts=None):
    """(name, builder) of every unconstrained near-optimal construction of a structure."""
    return structure_for(model, fanout).near(hist, c, opts.exact_seconds if opts else EXACT_SECONDS)


PROOF_TOLERANCE = 1e-9
LOOSE_BUDGET = 1.5  # page budgets from this many times the even split's pages also try the unconstrained builders
LOOSE_MAX_KEYS = (
    100_000  # ... below this many keys (beyond, their trees of many more pages rarely fit and cost seconds)
)
POLISH_TOP = 2
RANK_THREADS = max(1, min(4, os.cpu_count() or 1))


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
    structure: ClassicTree | BPlusTree = ClassicTree()  # the tree family, its fanout and even-split fills
    budget: Budget = Budget(None, None)

    @property
    def model(self) -> str:
        return self.structure.name

    @property
    def fanout(self) -> int:
        return self.structure.fanout

    @property
    def leaf_fill(self) -> float:
        return self.structure.leaf_fill

    @property
    def internal_fill(self) -> float:
        return self.structure.internal_fill

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
    polish_ops: float = 2e9  # exact DP work spent re-solving subtrees of a near plan (estimate; runs
    # well below it: n = 5,000, c = 3 took 1.4 s), and the most one subtree may take:
    polish_subtree_ops: float = 1e9
    recut_ops: float = 3e9  # exact DP work spent re-cutting windows of page keys (classic B-tree)
    smoothing: float = 0.0  # plan on hist.smoothed(smoothing); costs are always on the raw histogram
    model: str = "btree"  # or "bplus" (keys only in leaves, variable depth)
    fanout: int = 0  # bplus with a direct capacity: children per internal page
    check: bool = True
    budget: BudgetSpec = field(default_factory=BudgetSpec)  # default: the even split's pages and height
    within_polish_ops: float = 4e8  # work of exact re-solves of subtrees within the budget (about 1.2e8
    # per second of this machine kind, see constrained.WITHIN_OPS_PER_SECOND), and the most one may take:
    within_subtree_ops: float = 2e8
    within_recut_ops: float = 3e8  # ... of exact re-cuts of page-key windows within the budget (classic;
    # frontier points skip them: at n = 2,000 they gained 0-0.4% after the re-solves of subtrees)
    within_restricted_ops: float | None = None  # work of one whole-tree re-solve over candidate upper
    # keys; None: two thirds of what --exact-seconds buys (2e9 at 5 s, about 3 s of this machine kind;
    # see restricted.OPS_PER_SECOND); up to RESTRICTED_ROUNDS of them while they gain
    quick: bool = False  # a frontier point: large tables skip the slow unconstrained builders
    leaf_fill: float = 1.0  # share of each even-split leaf page a bulk loader fills (the baseline)
    internal_fill: float | None = None  # ... and of each internal page (default: the leaves' fill)


def plan_capacity(
    hist: Histogram,
    c: int,
    geometry: Geometry | None = None,
    options: PlanOptions | None = None,
    on_step: Callable[[str], None] | None = None,
    known_bounds: dict | None = None,
    known_even: tuple[Layout, Cost] | None = None,
) -> Plan:
    """Plan one capacity ``c``: exact when affordable, else near-optimal with a bound; every
    layout returned keeps within the budget of ``options.budget``. ``known_bounds``: the
    budget-free lower bounds of this histogram and capacity, when already computed; ``known_even``:
    the even split of this capacity and its cost on ``hist``, when already built and checked (the
    frontier's points share the plan's)."""
    opts = options or PlanOptions()
    step = on_step or (lambda _s: None)
    fit = hist.smoothed(opts.smoothing)  # the weights the layout is fitted to
    t0 = time.perf_counter()
    shape = _structure(opts, geometry)
    uni, uni_cost = known_even if known_even is not None else (shape.even_split(hist.n, c), None)
    uni_cost = uni_cost or evaluate(uni, hist)
    uni_reads = uni_cost.expected_page_reads if fit is hist else evaluate(uni, fit).expected_page_reads
    budget = plan_budget(opts.budget, uni, hist.n, c, shape)
    dual = dp_objective = None
    full = None
    if hist.total <= 0 and not budget.allows(uni):
        # loose fills need more pages than the budget: the same split with full pages, if it fits
        full = structure_for(opts.model, opts.fanout, 1.0, 1.0).even_split(hist.n, c)
        full = full if budget.allows(full) else None
    if hist.total <= 0 and (full is not None or budget.allows(uni)):
        # nothing is looked up: every layout costs 0, so keep the layout the loader would build
        if full is None:
            best, method, proven, fit_cost = uni, "no lookups: even split kept", True, None
        else:
            best, method, proven, fit_cost = full, "no lookups: even split with full pages (the budget)", True, None
    elif hist.total <= 0:
        best, method, proven, dual, fit_cost = _within(shape, fit, c, uni, budget, opts, step, uni_reads)
    elif budget.max_pages is None and budget.max_height is None:
        best, method, proven, dp_objective, fit_cost = _unlimited(shape, fit, c, uni, opts, step, uni_reads)
    else:
        best, method, proven, dual, fit_cost = _within(shape, fit, c, uni, budget, opts, step, uni_reads)
    if best is uni:
        best_cost = uni_cost
    elif fit is hist and fit_cost is not None:
        best_cost = fit_cost  # costed on these very weights while ranking
    else:
        best_cost = evaluate(best, hist)
    if opts.check:
        check_layout(best, budget)
        if known_even is None:
            check_layout(uni)
    step("bounds")
    bounds = dict(known_bounds) if known_bounds is not None else shape.bounds(hist, c)
    bounds.pop("within_budget", None)
    if dual is not None and opts.smoothing <= 0:
        bounds["within_budget"] = min(dual, best_cost.expected_page_reads)
    if not proven and best_cost.expected_page_reads <= max(bounds.values()) * (1 + PROOF_TOLERANCE):
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
        structure=shape,
        budget=budget,
    )


def _structure(opts: PlanOptions, geometry: Geometry | None) -> ClassicTree | BPlusTree:
    shape = structure_for(opts.model, opts.fanout, opts.leaf_fill, opts.internal_fill)
    return shape.with_fanout(geometry, opts.fanout)


def plan_budget(spec: BudgetSpec, uni: Layout, n: int, c: int, shape: ClassicTree | BPlusTree) -> Budget:
    """The plan's limits: ``spec`` against the even split and the least any layout needs."""
    if n == 0:
        return Budget(None, None)
    pages, height, note = shape.least(n, c, uni)
    return resolve(spec, uni, pages, height, note)


def _rank(
    fit: Histogram, uni: Layout, candidates, step, budget: Budget | None = None, uni_reads=None, keep=POLISH_TOP + 1
) -> list:
    """(reads, name, layout, cost) of the best ``keep`` of the even split (cost None) and the
    candidates (within ``budget``), best first.

    Candidates are built and costed on one thread per core: the budgeted constructions are
    compiled without the GIL and numpy releases it in the evaluator's large operations. The
    ranking does not depend on which finishes first (ties keep the candidates' order)."""

    def one(name: str, build):
        cand = build()
        if budget is None or budget.allows(cand):
            cost = evaluate(cand, fit)
            return cost.expected_page_reads, name, cand, cost
        return None

    if uni_reads is None:
        uni_reads = evaluate(uni, fit).expected_page_reads
    ranked = [(uni_reads, "even split (nothing better found)", uni, None)]
    todo = iter(candidates)
    with ThreadPoolExecutor(max_workers=RANK_THREADS) as pool:
        # at most RANK_THREADS + 1 candidates submitted and not yet read: a finished layout
        # waits in its future until read, and a slow first candidate would otherwise let every
        # later one finish and wait beside it (a layout is about 40 MB at 10M keys)
        jobs = deque((name, pool.submit(one, name, build)) for name, build in islice(todo, RANK_THREADS + 1))
        while jobs:
            name, job = jobs.popleft()  # the future is let go with its result once read
            step(name)
            found = job.result()
            del job
            following = next(todo, None)
            if following is not None:
                jobs.append((following[0], pool.submit(one, *following)))
            if found is not None:
                ranked.append(found)
                # only the best few are refined: the others' layouts are let go at once (memory)
                ranked = sorted(ranked, key=lambda x: x[0])[:keep]
    return ranked


def _improve(
    best: tuple, ranked: list, uni: Layout, fit: Histogram, step, label: str, suffix: str, refine, top=POLISH_TOP
) -> tuple:
    """Apply ``refine`` to the ``top`` best candidates (the best before need not be the best after)."""
    for _value, name, cand, _cost in ranked[:top]:
        if cand is uni:
            continue
        step(f"{label} ({name})")
        better = refine(cand)
        if better is None:
            continue
        cost = evaluate(better, fit)
        if cost.expected_page_reads < best[0]:
            best = (cost.expected_page_reads, name + suffix, better, cost)
    return best


def _unlimited(shape, fit: Histogram, c: int, uni: Layout, opts: PlanOptions, step, uni_reads=None):
    """No budget: the unconstrained optimum, exact when affordable (the behaviour before budgets)."""
    seconds, mem = shape.exact_cost(fit, c)
    if seconds <= opts.exact_seconds and mem <= opts.exact_max_bytes:
        step("exact")
        res = shape.solve_exact(fit, c)
        method = "exact DP" + (f" on smoothed weights (alpha {opts.smoothing:g})" if opts.smoothing > 0 else "")
        return res.layout, method, opts.smoothing <= 0, (res.objective if opts.smoothing <= 0 else None), None
    ranked = _rank(fit, uni, shape.near(fit, c, opts.exact_seconds), step, uni_reads=uni_reads)
    best = ranked[0]
    if opts.polish_ops > 0:
        best = _improve(
            best,
            ranked,
            uni,
            fit,
            step,
            "exact re-solve of small subtrees",
            " + exact small subtrees",
            lambda cand: polish(cand, fit, opts.polish_ops / POLISH_TOP, opts.polish_subtree_ops),
        )
    if opts.recut_ops > 0 and best[2] is not uni:
        step("exact re-cuts of page keys")
        cut = shape.recut(best[2], fit, opts.recut_ops)
        if cut is not None:
            cost = evaluate(cut, fit)
            if cost.expected_page_reads < best[0]:
                best = (cost.expected_page_reads, best[1] + " + exact re-cuts", cut, cost)
    return best[2], best[1], False, None, best[3]


def _within(shape, fit: Histogram, c: int, uni: Layout, budget: Budget, opts: PlanOptions, step, uni_reads=None):
    """Best layout found within the budget: (layout, method, proven, dual bound or None, its cost
    on ``fit`` or None)."""
    n = fit.n
    height = budget.max_height if budget.max_height is not None else min(n, budget.max_pages or n)
    seconds, mem, feasible = shape.within_exact_cost(n, c, height)
    if feasible and seconds <= opts.exact_seconds and mem <= opts.exact_max_bytes:
        step("exact within the budget")
        res = shape.solve_within(fit, c, budget, height)
        proven = res.proven and opts.smoothing <= 0
        method = "exact DP within the budget" if proven else "exact DP with a price per page (best point found)"
        return res.layout, method, proven, res.dual_bound, None
    quick = opts.quick and n > LOOSE_MAX_KEYS
    candidates = _budget_candidates(shape, fit, c, uni, budget, opts, quick)
    # A structure's trial-built candidate (the pilot construction) is refined on top of the usual
    # best two, each with the same work as before, and the best two candidates (by their best
    # version) are both re-cut: so adding it never leaves a worse plan than without it.
    trial = shape.trial_candidates(n, quick)
    top = POLISH_TOP + trial
    ranked = _rank(fit, uni, candidates, step, budget, uni_reads, keep=top + 1)
    versions = {entry[1]: entry for entry in ranked}  # each candidate's best version so far
    if opts.within_polish_ops > 0 and not quick:
        for _reads, name, cand, _cost in ranked[:top]:
            if cand is uni:
                continue
            step(f"exact re-solve of subtrees within the budget ({name})")
            out = shape.refine_within(cand, fit, budget, opts.within_polish_ops / POLISH_TOP, opts.within_subtree_ops)
            if out is not None and budget.allows(out):
                cost = evaluate(out, fit)
                if cost.expected_page_reads < versions[name][0]:
                    versions[name] = (cost.expected_page_reads, name + " + exact subtrees", out, cost)
    finalists = sorted(versions.values(), key=lambda x: x[0])[: 1 + trial]
    best = finalists[0]
    if opts.within_recut_ops > 0 and not opts.quick:
        for entry in finalists:
            if entry[2] is uni:
                continue
            step("exact re-cuts of page keys within the budget")
            cut = shape.recut_within(entry[2], fit, budget, opts.within_recut_ops)
            if cut is not None and budget.allows(cut):
                cost = evaluate(cut, fit)
                if cost.expected_page_reads < best[0]:
                    best = (cost.expected_page_reads, entry[1] + " + exact re-cuts", cut, cost)
    if restricted_ops(opts) > 0:  # from the even split too: its upper keys and the hot ones
        return _resolve_upper(shape, fit, budget, opts, step, best)
    return best[2], best[1], False, None, best[3]


RESTRICTED_SHARE = 2 / 3  # of the --exact-seconds work, per round of the whole-tree re-solve


def restricted_ops(opts: PlanOptions) -> float:
    """Work one round of the whole-tree re-solve may take. It is an exact DP over a family of
    trees, so ``--exact-seconds`` sets it (0: not at all) unless the options name a figure."""
    if opts.exact_seconds <= 0:
        return 0.0
    if opts.within_restricted_ops is not None:
        return opts.within_restricted_ops
    return RESTRICTED_SHARE * opts.exact_seconds * RESTRICTED_OPS_PER_SECOND


RESTRICTED_ROUNDS = 2  # a third gained 0-0.2% at n = 2,000 for as much time again
RESTRICTED_AGAIN = 0.002  # a second round only after a first that saved at least 0.2%


def _resolve_upper(shape, fit: Histogram, budget: Budget, opts: PlanOptions, step, best):
    """Whole-tree re-solves over candidate upper keys, each from the best layout so far, while
    they gain (:mod:`advisor.optimize.restricted`); the exact optimum when every key fitted."""
    ops = restricted_ops(opts)
    for _ in range(RESTRICTED_ROUNDS):
        if ops <= 0:
            break
        layout = best[2]
        height = int(layout.depths().max()) + 1
        if budget.max_height is not None:
            height = min(height, budget.max_height)
        if height <= 2:  # root and leaves: 0.01-0.1% fewer reads for 1-4 s in one ad-hoc run (3,000-30,000
            # keys, c = 100-300; not a committed benchmark)
            break
        step("exact re-solve of the whole tree over candidate upper-page keys")
        res = shape.resolve_within(layout, fit, budget, height, ops)
        if res is None or not budget.allows(res.layout):
            break
        cost = evaluate(res.layout, fit)
        if res.proven and opts.smoothing <= 0 and height == budget.max_height:
            if cost.expected_page_reads <= best[0]:
                return res.layout, "exact DP within the budget", True, res.dual_bound, cost
        if cost.expected_page_reads >= best[0] * (1 - 1e-12):
            break
        again = cost.expected_page_reads < best[0] * (1 - RESTRICTED_AGAIN)
        tag = " + exact re-solve over candidate upper-page keys"
        name = best[1] if best[1].endswith(tag) else best[1] + tag
        best = (cost.expected_page_reads, name, res.layout, cost)
        if not again:
            break
    return best[2], best[1], False, None, best[3]


def _budget_candidates(shape, fit: Histogram, c: int, uni: Layout, budget: Budget, opts: PlanOptions, quick: bool):
    """(name, builder) of the constructions tried within a budget; every result is checked
    against the budget before it is ranked."""
    yield from shape.within(fit, c, uni, budget, quick)
    small = fit.n <= LOOSE_MAX_KEYS
    loose = budget.max_pages is not None and budget.max_pages >= LOOSE_BUDGET * uni.pages
    if (budget.max_pages is None and (small or not opts.quick)) or (loose and small):
        # the unconstrained constructions use many more pages than the even split; below a
        # loose budget they never fit, so they are not built
        yield from shape.near(fit, c, opts.exact_seconds)
