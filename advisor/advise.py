"""The main job as one library call: a histogram and page settings in, one plan per size out."""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field, replace
from pathlib import Path

import numpy as np

from .balanced import balanced_bplus_layout, balanced_miss_bound
from .budget import BudgetSpec
from .bufferpool import Replay, pinned_misses, pool_figures, pool_to_match
from .current_index import current_figures
from .errors import SettingInvalid
from .frontier import frontier
from .geometry import (
    DEFAULT_CHILD_POINTER,
    DEFAULT_PAGE_HEADER,
    DEFAULT_PAGE_SIZES,
    DEFAULT_RECORD_POINTER,
    Geometry,
    geometry_for,
    longest_keys_width,
)
from .histogram import Histogram
from .holdout import holdout_rows
from .layout import Layout, evaluate
from .logreads import load_replay, load_scans, load_split, ranked_keys, truncated_separator_bytes
from .optimize.bounds import forget_sorted_key_weights
from .pagesize import PROFILES, StorageProfile, default_pool_bytes, page_size_table
from .planner import Plan, PlanOptions, plan_capacity
from .result import HoldoutResult, PlanResult, RunResult
from .scans import scan_figures
from .serialize import cost_dict
from .structures import BPlusTree, ClassicTree, structure_for, structure_names
from .workload import Workload


@dataclass
class PageSettings:
    """Which capacities to plan for. Page sizes give c by the geometry formula; keys_per_page gives c directly."""

    page_sizes: list[int] = field(default_factory=list)
    keys_per_page: list[int] = field(default_factory=list)
    page_header: int = DEFAULT_PAGE_HEADER
    record_pointer: int = DEFAULT_RECORD_POINTER
    child_pointer: int = DEFAULT_CHILD_POINTER
    key_bytes: float | None = None  # None: from the key column's type / measured width
    model: str = "btree"  # or "bplus": then c is the leaf capacity L; or "both"
    fill_factor: float = 1.0  # the even split's leaves (a bulk loader's fill factor)
    internal_fill: float | None = None  # the even split's internal pages (default: fill_factor)

    @property
    def structure(self) -> ClassicTree | BPlusTree:
        """The one structure these settings name (a request for both is split before this)."""
        return structure_for(self.model, 0, self.fill_factor, self.internal_fill)


def capacities(
    settings: PageSettings, measured_key_bytes: float, key_lengths: np.ndarray | None = None
) -> list[tuple[int, Geometry | None]]:
    """(c, geometry) for every requested size; defaults to the common page sizes. Variable-length
    keys (``key_lengths``, longest first) are sized per page size by their longest keys
    (:func:`advisor.geometry.longest_keys_width`) unless --key-bytes gives a width."""
    out: list[tuple[int, Geometry | None]] = []
    shape = settings.structure
    for c in settings.keys_per_page:
        if c < 1:
            raise SettingInvalid(f"keys per page must be at least 1, got {c}")
        out.append((int(c), None))
    sizes = settings.page_sizes or ([] if settings.keys_per_page else list(DEFAULT_PAGE_SIZES))
    kb = settings.key_bytes if settings.key_bytes is not None else measured_key_bytes
    for size in sizes:
        if size < 1:
            raise SettingInvalid(f"page size must be positive, got {size}")
        width = kb
        if settings.key_bytes is None and key_lengths is not None:
            width = longest_keys_width(
                key_lengths, size, settings.page_header, settings.record_pointer, settings.child_pointer
            )
        g = geometry_for(
            size, width, settings.page_header, settings.record_pointer, settings.child_pointer, settings.fill_factor
        )
        out.append((shape.capacity(g), g))
    return out


def plan_options(req: Request) -> PlanOptions:
    """The planner's options for the request's one structure."""
    s = req.settings
    return PlanOptions(
        smoothing=req.smoothing,
        model=s.structure.name,
        fanout=req.fanout or 0,
        exact_seconds=req.exact_seconds,
        budget=req.budget,
        leaf_fill=s.fill_factor,
        internal_fill=s.internal_fill,
    )


def advise(
    hist: Histogram,
    targets: list[tuple[int, Geometry | None]],
    options: PlanOptions | None = None,
    on_plan: Callable[[int, str], None] | None = None,
) -> list[Plan]:
    """Plan every target capacity; ``on_plan(index, step)`` reports progress."""
    plans = []
    for idx, (c, g) in enumerate(targets):
        step = (lambda s, i=idx: on_plan(i, s)) if on_plan else None
        plans.append(plan_capacity(hist, c, g, options, step))
    forget_sorted_key_weights(hist)  # every capacity's bounds are known: free their sorted weights
    return plans


LAYOUTS = ("advised", "even", "balanced")


def chosen_layout(plan: Plan, hist: Histogram, which: str, pool_pages: list[int] | None = None) -> tuple[Layout, float]:
    """One plan's layout to export or build, with its expected page reads: the advised layout,
    the even split, or (B+ only) the balanced shape, every leaf at the even split's depth with
    leaf boundaries cut for the pool (the one an engine with one leaf depth can hold)."""
    if which == "advised":
        return plan.recommended, plan.recommended_cost.expected_page_reads
    if which == "even":
        return plan.uniform, plan.uniform_cost.expected_page_reads
    if which != "balanced":
        raise SettingInvalid(f"the layout is one of {', '.join(LAYOUTS)}, not {which!r}")
    if not plan.structure.has_balanced_shape:
        raise SettingInvalid("the balanced layout is a B+ tree: give --model bplus")
    layout = balanced_bplus_layout(hist, plan.uniform, pool_pages)[0]
    return layout, evaluate(layout, hist).expected_page_reads


def export_paths(path: str | Path, plans: list[Plan], only: int | None = None) -> list[tuple[Plan, Path]]:
    """Where each plan's export goes: ``path`` itself for one plan, else one suffixed file each
    (page size or capacity, plus "-bplus" for B+-tree plans when both structures are planned).

    ``only`` picks the plans of one page size or keys per page.
    """
    path = Path(path)
    if only is not None:
        chosen = [p for p in plans if p.page_size == only] or [p for p in plans if p.keys_per_page == only]
        if not chosen:
            sizes = ", ".join(str(p.page_size or f"c={p.keys_per_page}") for p in plans)
            raise SettingInvalid(f"no plan for page size or keys per page {only} (planned: {sizes})")
        plans = chosen
    if len(plans) == 1:
        return [(plans[0], path)]
    mixed = len({p.model for p in plans}) > 1
    out = []
    for p in plans:
        label = f"{p.page_size}B" if p.page_size else f"c{p.keys_per_page}"
        if mixed:
            label += p.structure.export_suffix
        out.append((p, path.with_name(f"{path.stem}-{label}{path.suffix}")))
    if len({target for _, target in out}) != len(out):
        raise SettingInvalid("two plans would export to the same file; pick one with --export-for")
    return out


@dataclass
class Request:
    """Everything a run asks for beyond the workload itself."""

    settings: PageSettings = field(default_factory=PageSettings)
    smoothing: float = 0.0
    fanout: int | None = None  # bplus with keys_per_page
    truncate_separators: bool = False
    pool_pages: list[int] | None = None
    order_column: str | None = None  # enables the LRU replay and the held-out check
    replay_limit: int = 20_000_000  # about 12 bytes per replayed lookup
    holdout: float = 0.2
    scan_to: str | None = None
    storage: StorageProfile | None = None
    pool_bytes: int | None = None
    exact_seconds: float = 5.0  # run the exact DP when its estimated time is within this
    budget: BudgetSpec = field(default_factory=BudgetSpec)  # page and height limits per plan
    frontier: bool = True  # also plan at 1.1x .. 2x and no page limit (the reads-space frontier)
    current: str | None = None  # sqlite:PATH:INDEX: the user's existing index, costed beside the plans


def plan_one(wl: Workload, req: Request) -> Plan:
    """The plan of the one page size (or keys per page) the request names: what a build writes."""
    s = req.settings
    if len(structure_names(s.model)) != 1:
        raise SettingInvalid("a build writes one structure: --model btree or bplus")
    targets = capacities(s, wl.key_bytes, wl.key_lengths)
    if len(targets) != 1:
        raise SettingInvalid(f"a build writes one page size; {len(targets)} were asked for (give one --page-size)")
    if req.truncate_separators:
        raise SettingInvalid("--truncate-separators sizes pages for shortened separators; a build stores full keys")
    c, g = targets[0]
    return plan_capacity(wl.hist, c, g, plan_options(req))


@dataclass
class Analysis:
    """A run's typed result and its JSON form (built once; the CLI adds exports and timings)."""

    result: RunResult
    run: dict = field(init=False)  # the JSON-ready result the report is drawn from

    def __post_init__(self) -> None:
        self.run = self.result.to_json()

    @property
    def plans(self) -> list[Plan]:
        return [p.plan for p in self.result.plans]


@dataclass(frozen=True)
class LogReads:
    """Everything a run reads from DuckDB beyond the histogram, read once before any planning:
    the ordered replay (LRU figures), the range scans, and the earlier/later split (held-out)."""

    replay: Replay | None = None
    scans: tuple | None = None  # (first ranks, last ranks, weights, point-lookup histogram)
    split: tuple[Histogram, Histogram] | None = None
    current: dict | None = None  # the user's existing index (--current), costed on the histogram


def read_log_extras(wl: Workload, req: Request) -> LogReads:
    if (req.order_column or req.scan_to) and not wl.log:
        raise SettingInvalid("--order-column and --scan-to need --log")
    replay = load_replay(wl, req.order_column, req.replay_limit) if req.order_column else None
    scans = load_scans(wl, req.scan_to) if req.scan_to else None
    split = load_split(wl, req.order_column, req.holdout) if req.order_column and req.holdout > 0 else None
    current = current_figures(req.current, wl.hist, ranked_keys(wl)) if req.current else None
    return LogReads(replay, scans, split, current)


def analyse(wl: Workload, req: Request, on_plan: Callable[[int, str], None] | None = None) -> Analysis:
    """Plan every capacity and add the buffer-pool, balanced, scan, held-out and page-size figures.

    A model of "both" plans the classic B-tree and the B+-tree side by side: one list
    of plans (each says its model), so a scan-heavy or cache-bound workload shows which suits it.
    Everything is read from DuckDB first (:func:`read_log_extras`), then planned on arrays.
    """
    models = structure_names(req.settings.model)
    if req.truncate_separators and "bplus" not in models:
        raise SettingInvalid("--truncate-separators applies to --model bplus")
    reads = read_log_extras(wl, req)
    parts: list[RunResult] = []
    pool_bytes = req.pool_bytes
    for model in models:
        one = replace(req, settings=replace(req.settings, model=model), pool_bytes=pool_bytes)
        one = replace(one, truncate_separators=req.truncate_separators and one.settings.structure.has_separators)
        parts.append(_analyse_structure(wl, one, reads, on_plan))
        # one pool in bytes for both structures
        pool_bytes = pool_bytes or default_pool_bytes([p.plan for p in parts[0].plans])
    result = parts[0] if len(parts) == 1 else parts[0].beside(parts[1])
    return Analysis(replace(result, current=reads.current, pool_bytes=req.pool_bytes))


def _analyse_structure(wl: Workload, req: Request, reads: LogReads, on_plan) -> RunResult:
    """The whole run for one structure (``req.settings.model`` is btree or bplus)."""
    s = req.settings
    targets = capacities(s, wl.key_bytes, wl.key_lengths)
    if req.truncate_separators:
        targets = [(c, replace(g, separator_bytes=truncated_separator_bytes(wl, c)) if g else g) for c, g in targets]
    unique = list({(c, g.page_size if g else None): (c, g) for c, g in targets}.values())
    options = plan_options(req)
    plans = advise(wl.hist, unique, options, on_plan)
    pool_bytes = req.pool_bytes or default_pool_bytes(plans)
    results = [_measure(wl.hist, idx, p, req, reads, options, pool_bytes, on_plan) for idx, p in enumerate(plans)]
    holdout = None
    if reads.split is not None:
        train, test = reads.split
        alphas = [0.0] + ([req.smoothing] if req.smoothing > 0 else [])
        rows = holdout_rows(train, test, unique, alphas, options)
        holdout = HoldoutResult(req.holdout, train.total, test.total, rows)
    profile = req.storage or PROFILES["nvme"]
    choice = page_size_table(plans, wl.hist, profile, _table_pool_bytes(req, plans))
    return RunResult(
        wl.hist, _inputs(wl, reads, req.settings.key_bytes), tuple(results), holdout, choice if choice["rows"] else None
    )


def _measure(hist, idx: int, p: Plan, req: Request, reads: LogReads, options, pool_bytes: int, on_plan) -> PlanResult:
    """Every figure of one plan the request asks for: pool, frontier, balanced shape, scans."""
    pools = pool_figures(p.uniform, p.recommended, hist, reads.replay, req.pool_pages)
    if req.frontier and on_plan:
        on_plan(idx, "reads-space frontier")
    scans = None
    if reads.scans is not None:
        first, last, weight, points = reads.scans
        scans = scan_figures(p, points, first, last, weight)
    return PlanResult(
        p,
        pools,
        pool_equivalent(p, hist, pool_bytes, req.pool_pages),
        frontier(p, hist, options) if req.frontier else None,
        balanced_figures(hist, p, req.pool_pages) if p.structure.has_balanced_shape else None,
        scans,
    )


def pool_equivalent(p: Plan, hist: Histogram, pool_bytes: int, pool_pages: list[int] | None) -> dict:
    """The advice in memory terms: how large a pinned pool the even split needs to miss no more
    than the advised layout with the run's pool (``pool_bytes`` or the first ``--pool-pages``)."""
    size = p.page_size
    pool = (pool_pages[0] if pool_pages else max(1, pool_bytes // size if size else 1)) if p.uniform.pages else 0
    need = pool_to_match(p.uniform, p.recommended, hist, pool)
    even, advised = pinned_misses(p.uniform, hist, [pool])[0], pinned_misses(p.recommended, hist, [pool])[0]
    return {
        "even_misses": float(even),
        "advised_misses": float(advised),
        "pool_pages": int(pool),
        "even_split_pool_pages": int(need),
        "pool_equivalent_pages": int(max(0, need - pool)),
        "pool_equivalent_bytes": int(max(0, need - pool) * size) if size else None,
    }


def _table_pool_bytes(req: Request, plans: list[Plan]) -> int:
    """The pool the page-size choice is judged with: --pool-bytes; else the first --pool-pages
    count of the largest planned page size; else the default (1% of the index, one page at least)."""
    if req.pool_bytes:
        return req.pool_bytes
    sizes = [p.page_size for p in plans if p.page_size]
    if req.pool_pages and sizes:
        return req.pool_pages[0] * max(sizes)
    return default_pool_bytes(plans)


def _inputs(wl: Workload, reads: LogReads, given_key_bytes: float | None = None) -> dict:
    return {
        "database": wl.info.get("database"),
        "table": wl.table,
        "key": wl.key,
        "key_type": wl.key_type,
        "key_bytes": round(wl.key_bytes, 2),
        "key_sizing": (
            f"--key-bytes {given_key_bytes:g}"
            if given_key_bytes is not None
            else "by the longest keys a page could hold (the mean would let pages of long keys overflow)"
            if wl.key_lengths is not None
            else "the type's fixed width"
        ),
        "log": wl.log or "(none)",
        **{k: v for k, v in wl.info.items() if k != "database"},
        "replayed_lookups": int(reads.replay.outcomes.size) if reads.replay is not None else None,
    }


def balanced_figures(hist: Histogram, p: Plan, pool_pages: list[int] | None) -> dict:
    """The balanced B+-tree shape (every leaf at one depth) for the pool, with its miss bound."""
    layout, sizes, how = balanced_bplus_layout(hist, p.uniform, pool_pages)
    depths = p.uniform.depths()[p.uniform.leaf] if p.uniform.pages else np.zeros(1, dtype=np.int64)
    height, one_depth = int(depths.max()), bool(depths.min() == depths.max())
    even_misses, balanced_misses = pinned_misses(p.uniform, hist, sizes), pinned_misses(layout, hist, sizes)
    rows = [
        {
            "pool_pages": b,
            "uniform_pinned": u,
            "balanced_pinned": m,
            "lower_bound": balanced_miss_bound(hist, p.keys_per_page, p.fanout, height, b, one_depth),
        }
        for b, u, m in zip(sizes, even_misses, balanced_misses, strict=True)
    ]
    return cost_dict(evaluate(layout, hist), layout, p.page_size) | {"method": how, "buffer_pool": rows}
