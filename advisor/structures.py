"""The two tree families behind one small interface, so the planner never asks which it has.

A structure knows, for its family: the even split, the least pages and levels any layout needs,
what its exact solvers cost and return (unlimited and within a budget), its near-optimal
constructions (unlimited and within a budget) and its lower bounds. ``structure_for`` picks one;
"both" in a request is simply a list of two.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterator
from dataclasses import dataclass

from .budget import Budget
from .errors import SettingInvalid
from .geometry import Geometry
from .histogram import Histogram
from .layout import Layout
from .optimize import (
    balanced_layout,
    exact_seconds,
    exact_work,
    heaviest_first_layout,
    hot_first_layout,
    integer_weights,
    lower_bounds,
    solve_exact,
    uniform_layout,
)
from .optimize.bplus import (
    balanced_bplus,
    bplus_chain,
    bplus_height,
    bplus_work,
    full_leaves_balanced,
    full_leaves_exact,
    hot_first_bplus,
    leaf_count,
    solve_bplus_exact,
    uniform_bplus,
)
from .optimize.bplus_bounds import bplus_level_bound, bplus_window_bound
from .optimize.bplus_constrained import bplus_constrained_work, solve_bplus_within
from .optimize.bplus_restricted import bplus_restricted_resolve
from .optimize.bplus_within import bplus_within_layout, hot_leaf_candidates
from .optimize.constrained import (
    EVALUATIONS,
    WITHIN_OPS_PER_SECOND,
    ConstrainedResult,
    constrained_bytes,
    constrained_work,
    solve_within,
)
from .optimize.recut import recut
from .optimize.refine import polish_within
from .optimize.restricted import restricted_resolve
from .optimize.uniform import min_height
from .optimize.within import PILOT_MAX_KEYS, fewest_pages, pilot_layout, within_budget_layout

BPLUS_OPS_PER_SECOND = 3e8  # element operations of the float64 B+ DP per second, measured on this machine kind
BPLUS_WITHIN_OPS_PER_SECOND = 1e8  # the budgeted B+ DP (plain numpy), measured: 300 keys, F = 8, ~0.25 s a run
BPLUS_WITHIN_MAX_KEYS = 1500  # its tables are (n + 1)^2 per forest size and level

Builder = tuple[str, Callable[[], Layout]]


MODELS = ("btree", "bplus")


def filled(slots: int, fill: float) -> int:
    """Entries a bulk loader puts in a page of ``slots`` at fill factor ``fill`` (at least one)."""
    return max(1, int(slots * fill + 1e-9))


@dataclass(frozen=True)
class ClassicTree:
    """Classic B-tree: every page holds keys and their records, c + 1 child slots.
    ``leaf_fill`` / ``internal_fill``: the share of each leaf / internal page a bulk loader fills
    in the even split (the baseline); the advice may fill pages completely."""

    leaf_fill: float = 1.0
    internal_fill: float = 1.0
    name = "btree"
    fanout = 0
    export_suffix = ""  # file-name suffix when both structures are exported
    has_balanced_shape = False  # no one-depth-leaves variant to report
    has_separators = False  # internal pages hold records, so there is no separator to shorten

    def capacity(self, g: Geometry) -> int:
        """Keys per page at this page geometry; a page that holds no key is an impossible setting."""
        if g.capacity < 1:
            raise SettingInvalid(
                f"page size {g.page_size} bytes holds no key: the minimum is {g.min_page_size} bytes "
                f"({g.page_header} header + {g.entry_bytes:g} per key)"
            )
        return g.capacity

    def with_fanout(self, g: Geometry | None, fanout: int) -> ClassicTree:
        return self

    def even_split(self, n: int, c: int) -> Layout:
        return uniform_layout(n, c, filled(c, self.leaf_fill), filled(c, self.internal_fill))

    def least(self, n: int, c: int, even: Layout) -> tuple[int, int, str]:
        """(fewest pages, fewest levels, note for an impossible page budget): N keys need
        ceil(N / c) pages, and that many suffice at the minimum height (see optimize.within)."""
        return fewest_pages(n, c), min_height(n, c), ""

    def exact_cost(self, fit: Histogram, c: int) -> tuple[float, float]:
        integer = integer_weights(fit, c)
        return exact_seconds(fit.n, c, integer), exact_work(fit.n, c, integer)[1]

    def solve_exact(self, fit: Histogram, c: int):
        return solve_exact(fit, c)

    def within_exact_cost(self, n: int, c: int, height: int) -> tuple[float, float, bool]:
        seconds = constrained_work(n, c, height) * EVALUATIONS / WITHIN_OPS_PER_SECOND
        return seconds, constrained_bytes(n, c, height), True

    def solve_within(self, fit: Histogram, c: int, budget: Budget, height: int) -> ConstrainedResult:
        return solve_within(fit, c, budget.max_pages, height)

    def near(self, fit: Histogram, c: int, exact_seconds_allowed: float) -> Iterator[Builder]:
        yield "weight-balanced", lambda: balanced_layout(fit, c, 0.0)
        yield "weight-balanced, spread 0.1", lambda: balanced_layout(fit, c, 0.1)
        yield "weight-balanced, heaviest key near each cut", lambda: balanced_layout(fit, c, 0.0, pick_heaviest=True)
        yield "hot-first", lambda: hot_first_layout(fit, c, 0)
        yield "hot-first, one level more at the root", lambda: hot_first_layout(fit, c, 1)
        yield "hot-first, one level more everywhere", lambda: hot_first_layout(fit, c, 1, everywhere=True)
        yield "heaviest keys first", lambda: heaviest_first_layout(fit, c)

    def within(self, fit: Histogram, c: int, even: Layout, budget: Budget, quick: bool) -> Iterator[Builder]:
        n = fit.n
        top = budget.max_height if budget.max_height is not None else int(even.depths().max()) + 1
        pages = budget.max_pages if budget.max_pages is not None else n
        heights = [top] if quick else sorted({top, max(min_height(n, c), top - 1)}, reverse=True)
        for h in heights:
            for tries in (4,) if quick else (1, 2, 4):
                yield (
                    f"hot keys lifted within the budget ({h} levels, {tries}c offered)",
                    lambda h=h, tries=tries: within_budget_layout(fit, c, pages, h, tries),
                )
            yield (
                f"evenly strided full pages first, then hot keys, within the budget ({h} levels)",
                lambda h=h: within_budget_layout(fit, c, pages, h, 2, fill_first=True),
            )
            if not quick:
                yield (
                    f"a quarter of each root for hot keys, then even cuts, within the budget ({h} levels)",
                    lambda h=h: within_budget_layout(fit, c, pages, h, 2, hot_share=0.25),
                )
        if not quick and n <= PILOT_MAX_KEYS:
            yield (
                f"each page's keys chosen by trial completions, within the budget ({top} levels)",
                lambda: pilot_layout(fit, c, pages, top, top),
            )

    def bounds(self, hist: Histogram, c: int) -> dict[str, float]:
        return lower_bounds(hist, c)

    def trial_candidates(self, n: int, quick: bool) -> int:
        """How many of :meth:`within`'s candidates are built by trial (the pilot construction)."""
        return 1 if not quick and n <= PILOT_MAX_KEYS else 0

    def refine_within(self, layout: Layout, fit: Histogram, budget: Budget, ops: float, subtree_ops: float):
        """Exact re-solves of subtrees within the budget (None: this family has none)."""
        return polish_within(layout, fit, budget.max_pages, budget.max_height, ops, subtree_ops)

    def recut(self, layout: Layout, fit: Histogram, ops: float):
        """Exact re-cuts of page keys (None: this family has none)."""
        return recut(layout, fit, ops)

    def resolve_within(self, layout: Layout, fit: Histogram, budget: Budget, height: int, ops: float):
        """The whole tree re-solved within the budget with its upper pages drawn from candidate
        keys (:mod:`advisor.optimize.restricted`; None: this family has none or it is too large)."""
        return restricted_resolve(layout, fit, budget.max_pages, height, ops)

    def recut_within(self, layout: Layout, fit: Histogram, budget: Budget, ops: float):
        """Exact re-cuts of page keys that keep within the budget (None: this family has none)."""
        return recut(layout, fit, ops, max_window_ops=ops / 2, max_pages=budget.max_pages, max_height=budget.max_height)


@dataclass(frozen=True)
class BPlusTree:
    """B+-tree: every key in a leaf of at most L keys, internal pages of at most ``fanout``
    children; leaves may sit at different depths."""

    fanout: int = 0
    leaf_fill: float = 1.0
    internal_fill: float = 1.0
    name = "bplus"
    export_suffix = "-bplus"
    has_balanced_shape = True
    has_separators = True  # internal pages hold separators (--truncate-separators shortens them)

    def capacity(self, g: Geometry) -> int:
        """Leaf capacity L at this page geometry; it must hold an entry and a page two children."""
        if g.leaf_capacity < 1 or g.fanout < 2:
            need = max(
                g.page_header + g.key_bytes + g.record_pointer, g.page_header + g.key_bytes + 2 * g.child_pointer
            )
            raise SettingInvalid(
                f"page size {g.page_size} bytes cannot hold a B+-tree leaf entry and two child pointers: "
                f"the minimum is {int(math.ceil(need))} bytes"
            )
        return g.leaf_capacity

    def with_fanout(self, g: Geometry | None, fanout: int) -> BPlusTree:
        """This structure at one page size: the geometry's fanout, or ``fanout`` given directly."""
        F = g.fanout if g else fanout
        if F < 2:
            raise SettingInvalid("a B+-tree plan needs a fanout of at least 2 (give --fanout with --keys-per-page)")
        return BPlusTree(F, self.leaf_fill, self.internal_fill)

    def even_split(self, n: int, c: int) -> Layout:
        return uniform_bplus(
            n, c, self.fanout, filled(c, self.leaf_fill), max(2, filled(self.fanout, self.internal_fill))
        )

    def least(self, n: int, c: int, even: Layout) -> tuple[int, int, str]:
        packed = self.leaf_fill == self.internal_fill == 1.0  # the even split is already full
        full = even.pages if packed else uniform_bplus(n, c, self.fanout).pages
        note = f"B+-tree plans keep at least the full even split's {full} pages (fewer is not built)"
        return full, bplus_height(n, c, self.fanout), note

    def exact_cost(self, fit: Histogram, c: int) -> tuple[float, float]:
        if fit.n <= c:
            return 0.0, 0.0
        F = self.fanout
        return bplus_work(fit.n, F) / BPLUS_OPS_PER_SECOND, (2 * len(bplus_chain(F)) + 4) * (fit.n + 1) ** 2 * 8.0

    def solve_exact(self, fit: Histogram, c: int):
        return solve_bplus_exact(fit, c, self.fanout)

    def within_exact_cost(self, n: int, c: int, height: int) -> tuple[float, float, bool]:
        seconds = bplus_constrained_work(n, self.fanout, height) * EVALUATIONS / BPLUS_WITHIN_OPS_PER_SECOND
        tables = (n + 1) ** 2 * 8.0 * (len(bplus_chain(self.fanout)) + 1) * max(1, height - 1)
        return seconds, tables, n <= BPLUS_WITHIN_MAX_KEYS

    def solve_within(self, fit: Histogram, c: int, budget: Budget, height: int) -> ConstrainedResult:
        return solve_bplus_within(fit, c, self.fanout, budget.max_pages, height)

    def near(self, fit: Histogram, c: int, exact_seconds_allowed: float) -> Iterator[Builder]:
        F = self.fanout
        if bplus_work(leaf_count(fit.n, c), F) / BPLUS_OPS_PER_SECOND <= exact_seconds_allowed:
            yield "full leaves, exact internal pages", lambda: full_leaves_exact(fit, c, F)
        yield "hot keys in leaves of their own", lambda: hot_first_bplus(fit, c, F, 0)
        yield "hot keys in leaves of their own, one level more", lambda: hot_first_bplus(fit, c, F, 1)
        yield "full leaves, weight-balanced internal pages", lambda: full_leaves_balanced(fit, c, F)
        yield "weight-balanced leaves", lambda: balanced_bplus(fit, c, F, 0.1)
        yield "weight-balanced leaves, spread 1", lambda: balanced_bplus(fit, c, F, 1.0)

    def within(self, fit: Histogram, c: int, even: Layout, budget: Budget, quick: bool) -> Iterator[Builder]:
        n, F = fit.n, self.fanout
        top = budget.max_height if budget.max_height is not None else int(even.depths().max()) + 1
        pages = budget.max_pages if budget.max_pages is not None else 2 * even.pages
        for starts in hot_leaf_candidates(fit, c, F, pages):
            label = "full leaves" if starts.size == leaf_count(n, c) else f"{starts.size:,} leaves, hot runs apart"
            for h in sorted({top, max(bplus_height(n, c, F), top - 1)}, reverse=True):
                yield (
                    f"hot leaves near the root within the budget ({label}, {h} levels)",
                    lambda s=starts, h=h: bplus_within_layout(fit, c, F, pages, h, s) or even,
                )

    def bounds(self, hist: Histogram, c: int) -> dict[str, float]:
        F = self.fanout
        return {"level_capacity": bplus_level_bound(hist, c, F), "leaf_runs": bplus_window_bound(hist, c, F)}

    def trial_candidates(self, n: int, quick: bool) -> int:
        return 0

    def refine_within(self, layout: Layout, fit: Histogram, budget: Budget, ops: float, subtree_ops: float):
        return None  # the budgeted re-solve of subtrees is classic-only so far

    def recut(self, layout: Layout, fit: Histogram, ops: float):
        return None

    def recut_within(self, layout: Layout, fit: Histogram, budget: Budget, ops: float):
        return None

    def resolve_within(self, layout: Layout, fit: Histogram, budget: Budget, height: int, ops: float):
        """The B+ form of the whole-tree re-solve over candidate boundaries
        (:mod:`advisor.optimize.bplus_restricted`)."""
        return bplus_restricted_resolve(layout, fit, budget.max_pages, height, ops)


def structure_names(model: str) -> list[str]:
    """The structures a request's model asks for: one, or both side by side."""
    if model == "both":
        return list(MODELS)
    if model not in MODELS:
        raise SettingInvalid(f"--model must be btree, bplus or both, got {model!r}")
    return [model]


def structure_for(
    model: str, fanout: int = 0, leaf_fill: float = 1.0, internal_fill: float | None = None
) -> ClassicTree | BPlusTree:
    """The structure a model name asks for ("btree", or "bplus" with its fanout), with the bulk
    loader's fill factors of its even split (internal pages default to the leaves' fill)."""
    inner = leaf_fill if internal_fill is None else internal_fill
    for fill in (leaf_fill, inner):
        if not 0 < fill <= 1:
            raise SettingInvalid(f"fill factor must be in (0, 1], got {fill:g}")
    if model == "bplus":
        return BPlusTree(fanout, leaf_fill, inner)
    return ClassicTree(leaf_fill, inner)
