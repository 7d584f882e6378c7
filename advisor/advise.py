"""The main job as one library call: a histogram and page settings in, one plan per size out."""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

from .errors import SettingInvalid
from .geometry import (
    DEFAULT_CHILD_POINTER,
    DEFAULT_PAGE_HEADER,
    DEFAULT_PAGE_SIZES,
    DEFAULT_RECORD_POINTER,
    Geometry,
    geometry_for,
)
from .histogram import Histogram
from .planner import Plan, PlanOptions, plan_capacity


@dataclass
class PageSettings:
    """Which capacities to plan for. Page sizes give c by the geometry formula; keys_per_page gives c directly."""

    page_sizes: list[int] = field(default_factory=list)
    keys_per_page: list[int] = field(default_factory=list)
    page_header: int = DEFAULT_PAGE_HEADER
    record_pointer: int = DEFAULT_RECORD_POINTER
    child_pointer: int = DEFAULT_CHILD_POINTER
    key_bytes: float | None = None  # None: from the key column's type / measured width
    model: str = "btree"  # or "bplus": then c is the leaf capacity L
    fill_factor: float = 1.0


def capacities(settings: PageSettings, measured_key_bytes: float) -> list[tuple[int, Geometry | None]]:
    """(c, geometry) for every requested size; defaults to the common page sizes."""
    out: list[tuple[int, Geometry | None]] = []
    for c in settings.keys_per_page:
        if c < 1:
            raise SettingInvalid(f"keys per page must be at least 1, got {c}")
        out.append((int(c), None))
    sizes = settings.page_sizes or ([] if settings.keys_per_page else list(DEFAULT_PAGE_SIZES))
    kb = settings.key_bytes if settings.key_bytes is not None else measured_key_bytes
    for size in sizes:
        if size < 1:
            raise SettingInvalid(f"page size must be positive, got {size}")
        g = geometry_for(size, kb, settings.page_header, settings.record_pointer, settings.child_pointer,
                         settings.model, settings.fill_factor)  # fmt: skip
        out.append((g.leaf_capacity if settings.model == "bplus" else g.capacity, g))
    return out


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
    return plans


def export_paths(path: str | Path, plans: list[Plan], only: int | None = None) -> list[tuple[Plan, Path]]:
    """Where each plan's export goes: ``path`` itself for one plan, else one suffixed file each.

    ``only`` picks one plan by page size or keys per page.
    """
    path = Path(path)
    if only is not None:
        chosen = [p for p in plans if p.page_size == only] or [p for p in plans if p.keys_per_page == only]
        if not chosen:
            sizes = ", ".join(str(p.page_size or f"c={p.keys_per_page}") for p in plans)
            raise SettingInvalid(f"no plan for page size or keys per page {only} (planned: {sizes})")
        plans = chosen[:1]
    if len(plans) == 1:
        return [(plans[0], path)]
    out = []
    for p in plans:
        label = f"{p.page_size}B" if p.page_size else f"c{p.keys_per_page}"
        out.append((p, path.with_name(f"{path.stem}-{label}{path.suffix}")))
    return out
