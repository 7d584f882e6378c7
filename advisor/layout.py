"""Page layouts, their invariant check, and THE evaluator that costs any layout.

Cost model (classic B-tree: every page holds 1..c keys and their records, c + 1 child slots):

* a hit on key k costs the number of pages on the root-to-page path of the page holding k
  (the root alone costs 1);
* a miss in gap g costs the number of pages visited until the search meets an empty child
  slot; that page is the deeper of the pages holding the gap's two neighbouring keys (one is
  always an ancestor of the other, or they share a page);
* expected page reads = (sum_k p_k * depth_k + sum_g q_g * depth_g) / (sum p + sum q).

A layout is stored as flat arrays, so a million-key plan costs a few megabytes:
``page_keys[page_start[i]:page_start[i+1]]`` are the ranks of the keys on page ``i`` in
ascending order, ``parent[i]`` / ``slot[i]`` place page ``i`` in child slot ``slot[i]`` of its
parent (the root is page 0 with parent -1). Pages are numbered so that a parent precedes its
children. ``structure`` names the tree family: "btree" is the classic model above; "bplus"
keeps every key in a leaf page (``leaf`` marks them; leaves hold at most ``capacity`` keys),
while an internal page with m <= ``fanout`` children holds m - 1 separator ranks, separator t
being the rank of the first key in child t's subtree. In a B+-tree every lookup, hit or miss,
costs the depth of the leaf whose key range covers it; a value between two leaves' keys goes to
the left leaf (separators are the right leaf's first key), one before the first key to the
first leaf. Only :func:`end_pages` and :func:`check_layout` know the family (the engine-side rule, a
search that always ends in a leaf, is :mod:`advisor.leaf_search`).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .errors import LayoutInvalid
from .histogram import Histogram
from .layout_kernel import depths_and_weight, end_pages_kernel, ordered_depths

STRUCTURES = ("btree", "bplus")


def rank_dtype(n: int) -> type:
    """The narrowest integer type that holds every key rank of an ``n``-key table: int32 below
    2^31 keys (half the memory of a layout's key array at 100M keys), else int64."""
    return np.int32 if n < 2**31 else np.int64


@dataclass(frozen=True)
class Layout:
    """A complete assignment of keys to pages and of pages to child slots."""

    structure: str
    n_keys: int
    capacity: int
    page_start: np.ndarray  # (pages + 1,) offsets into page_keys
    page_keys: np.ndarray  # (n_keys,) key ranks, ascending within each page
    parent: np.ndarray  # (pages,) parent page, -1 for the root
    slot: np.ndarray  # (pages,) child slot in the parent, -1 for the root
    fanout: int = 0  # bplus: most children of an internal page
    leaf: np.ndarray | None = None  # bplus: (pages,) True for leaf pages

    @property
    def pages(self) -> int:
        return int(self.parent.shape[0])

    def keys_of(self, page: int) -> np.ndarray:
        return self.page_keys[self.page_start[page] : self.page_start[page + 1]]

    def page_sizes(self) -> np.ndarray:
        return np.diff(self.page_start)

    def depths(self) -> np.ndarray:
        """Depth of every page (root = 1), from the parent links alone; computed once per layout
        (the planner, bounds, report and frontier ask many times) and handed out read-only."""
        cached = self.__dict__.get("_depth_cache")
        if cached is None:
            cached = _depths(self.parent)
            cached.flags.writeable = False
            self.__dict__["_depth_cache"] = cached  # beside the frozen fields, not one of them
        return cached


class LayoutBuilder:
    """Collects pages top-down (parents first) and freezes them into a :class:`Layout`."""

    def __init__(self, n_keys: int, capacity: int, structure: str = "btree", fanout: int = 0) -> None:
        self.n_keys, self.capacity, self.structure, self.fanout = n_keys, capacity, structure, fanout
        self._keys: list[np.ndarray] = []
        self._parent: list[int] = []
        self._slot: list[int] = []
        self._leaf: list[bool] = []
        self._dtype = rank_dtype(n_keys)

    def add(self, keys: np.ndarray, parent: int = -1, slot: int = -1, leaf: bool = True) -> int:
        """Append a page holding ``keys`` (ranks, ascending); returns its page id.

        For "bplus", ``leaf=False`` pages hold separator ranks instead of entries.
        """
        self._keys.append(np.asarray(keys, dtype=self._dtype))
        self._parent.append(parent)
        self._slot.append(slot)
        self._leaf.append(leaf)
        return len(self._parent) - 1

    def __len__(self) -> int:
        return len(self._parent)

    def set_keys(self, page: int, keys: np.ndarray) -> None:
        """Replace a page's keys (an internal B+-tree page learns its separators after its children)."""
        self._keys[page] = np.asarray(keys, dtype=self._dtype)

    def build(self) -> Layout:
        sizes = np.fromiter((k.size for k in self._keys), dtype=np.int64, count=len(self._keys))
        start = np.zeros(sizes.size + 1, dtype=np.int64)
        np.cumsum(sizes, out=start[1:])
        keys = np.concatenate(self._keys) if self._keys else np.zeros(0, dtype=self._dtype)
        return Layout(
            structure=self.structure,
            n_keys=self.n_keys,
            capacity=self.capacity,
            page_start=start,
            page_keys=keys,
            parent=np.asarray(self._parent, dtype=np.int64),
            slot=np.asarray(self._slot, dtype=np.int64),
            fanout=self.fanout,
            leaf=np.asarray(self._leaf, dtype=bool) if self.structure == "bplus" else None,
        )


def _depths(parent: np.ndarray) -> np.ndarray:
    """Depths in one compiled pass when parents precede children (every layout the planners
    build), else by repeated relaxation, one vectorised pass per level."""
    depth = ordered_depths(np.ascontiguousarray(parent, dtype=np.int64))
    if depth.shape[0] == parent.shape[0]:
        return depth
    depth = np.ones(parent.shape[0], dtype=np.int64)
    if parent.size <= 1:
        return depth
    child = np.nonzero(parent >= 0)[0]
    par = parent[child]
    for _ in range(parent.size):
        new = depth[par] + 1
        if np.array_equal(new, depth[child]):
            break
        depth[child] = new
    return depth


def check_layout(layout: Layout, budget=None) -> None:
    """Raise :class:`LayoutInvalid` unless ``layout`` is a valid search tree over its keys and,
    with ``budget`` (an :class:`advisor.budget.Budget`), within its page and height limits.

    Checks: every key rank 0..n-1 on exactly one page; 1..capacity keys per page, ascending;
    page 0 is the only root and parents precede children; each child slot is used at most once
    and lies within its parent's key count; every subtree's keys fall strictly between the two
    parent keys around its slot. Together these make the in-order walk the sorted key order.
    """
    if budget is not None:
        why = budget.violation(layout)
        if why:
            raise LayoutInvalid(f"layout outside its budget: {why}")
    if layout.structure not in STRUCTURES:
        raise LayoutInvalid(f"unknown structure {layout.structure!r}")
    if layout.structure == "bplus":
        return _check_bplus(layout)
    if layout.capacity < 1:
        raise LayoutInvalid("capacity must be at least 1")
    if _check_empty(layout):
        return
    _check_pages(layout)
    _check_parents(layout)
    if layout.pages > 1:
        _check_slots(layout)


def _check_empty(layout: Layout) -> bool:
    """True (and valid) for a layout over no keys; raises for keys without pages."""
    if layout.n_keys == 0:
        if layout.pages != 0:
            raise LayoutInvalid("a layout over no keys must have no pages")
        return True
    if layout.pages == 0:
        raise LayoutInvalid("keys but no pages")
    return False


def _check_pages(layout: Layout) -> None:
    """Offsets cover the keys, 1..c keys per page, every key once, ascending within a page."""
    n, c, P = layout.n_keys, layout.capacity, layout.pages
    keys, start = layout.page_keys, layout.page_start
    if start.shape != (P + 1,) or start[0] != 0 or start[-1] != keys.size:
        raise LayoutInvalid("page offsets do not cover the key array")
    sizes = np.diff(start)
    if sizes.min() < 1 or sizes.max() > c:
        raise LayoutInvalid(f"a page holds {int(sizes.min())}..{int(sizes.max())} keys, allowed 1..{c}")
    if keys.size != n or keys.min() < 0 or keys.max() >= n or np.bincount(keys, minlength=n).max() != 1:
        raise LayoutInvalid("not every key appears exactly once")
    page_of = np.repeat(np.arange(P), sizes)
    same_page = page_of[1:] == page_of[:-1]
    if np.any(keys[1:][same_page] <= keys[:-1][same_page]):
        raise LayoutInvalid("keys within a page are not ascending")


def _check_parents(layout: Layout) -> None:
    parent, P = layout.parent, layout.pages
    if parent[0] != -1 or np.any(parent[1:] < 0) or np.any(parent[1:] >= np.arange(1, P)):
        raise LayoutInvalid("page 0 must be the only root and parents must precede children")


def _check_slots(layout: Layout) -> None:
    """Each child slot used once, within its parent's key count, and every subtree's keys
    strictly between the two parent keys around its slot."""
    n, c, P = layout.n_keys, layout.capacity, layout.pages
    keys, start, parent = layout.page_keys, layout.page_start, layout.parent
    sizes = np.diff(start)
    ch = np.arange(1, P)
    par, sl = parent[1:], layout.slot[1:]
    if np.any(sl < 0) or np.any(sl > sizes[par]):
        raise LayoutInvalid("a child slot lies outside its parent's key count")
    pair = par * (c + 2) + sl
    if np.unique(pair).size != pair.size:
        raise LayoutInvalid("two children share one slot")
    depth = _depths(parent)  # subtree key ranges, bottom-up by depth
    lo = keys[start[:-1]].copy()
    hi = keys[start[1:] - 1].copy()
    for d in range(int(depth.max()), 1, -1):
        at = np.nonzero(depth == d)[0]
        np.minimum.at(lo, parent[at], lo[at])
        np.maximum.at(hi, parent[at], hi[at])
    left_bound = np.where(sl > 0, keys[start[par] + sl - 1], -1)
    right_bound = np.where(sl < sizes[par], keys[np.minimum(start[par] + sl, n - 1)], n)
    if np.any(lo[ch] <= left_bound) or np.any(hi[ch] >= right_bound):
        raise LayoutInvalid("a subtree's keys fall outside its slot in the parent page")


def _check_bplus(layout: Layout) -> None:
    """B+-tree invariants: leaves hold 1..L consecutive ranks covering 0..n-1 once, in order;
    internal pages have 2..F children in slots 0..m-1 (m - 1 separators), and child t's subtree
    covers exactly the ranks from separator t (or the page's own first rank) up to separator t+1."""
    if layout.capacity < 1 or layout.fanout < 2:
        raise LayoutInvalid("a B+-tree needs a leaf capacity of at least 1 and a fanout of at least 2")
    if _check_empty(layout):
        return
    if layout.leaf is None or layout.leaf.shape != (layout.pages,):
        raise LayoutInvalid("keys but no pages, or no leaf flags")
    _check_parents(layout)
    if np.any(layout.leaf[layout.parent[1:]]):
        raise LayoutInvalid("a leaf page has a child")
    _check_leaves(layout)
    _check_separators(layout)


def _check_leaves(layout: Layout) -> None:
    n, L, leaf = layout.n_keys, layout.capacity, layout.leaf
    lsz = layout.page_sizes()[leaf]
    if lsz.min() < 1 or lsz.max() > L:
        raise LayoutInvalid(f"a leaf holds {int(lsz.min())}..{int(lsz.max())} keys, allowed 1..{L}")
    leaf_keys = np.concatenate([layout.keys_of(p) for p in np.nonzero(leaf)[0]])
    if leaf_keys.size != n or np.bincount(leaf_keys, minlength=n).max() != 1 or leaf_keys.max() >= n:
        raise LayoutInvalid("not every key appears in exactly one leaf")
    for p in np.nonzero(leaf)[0]:
        if np.any(np.diff(layout.keys_of(p)) != 1):
            raise LayoutInvalid("a leaf's keys are not consecutive ranks")


def _check_separators(layout: Layout) -> None:
    """2..F children per internal page in slots 0..m-1, separators matching the children's ranges."""
    n, F, P, leaf = layout.n_keys, layout.fanout, layout.pages, layout.leaf
    children: dict[int, list[tuple[int, int]]] = {}
    for p in range(1, P):
        children.setdefault(int(layout.parent[p]), []).append((int(layout.slot[p]), p))
    lo = np.full(P, n, dtype=np.int64)
    hi = np.full(P, -1, dtype=np.int64)
    for p in range(P - 1, -1, -1):
        if leaf[p]:
            k = layout.keys_of(p)
            lo[p], hi[p] = k[0], k[-1]
            continue
        kids = sorted(children.get(p, []))
        seps = layout.keys_of(p)
        if not 2 <= len(kids) <= F or [s for s, _ in kids] != list(range(len(kids))) or len(seps) != len(kids) - 1:
            raise LayoutInvalid(f"internal page {p} must have 2..{F} children in slots 0..m-1 and m-1 separators")
        ids = [c for _, c in kids]
        lo[p], hi[p] = lo[ids[0]], hi[ids[-1]]
        for t in range(1, len(ids)):
            if lo[ids[t]] != seps[t - 1] or hi[ids[t - 1]] + 1 != lo[ids[t]]:
                raise LayoutInvalid(f"separator {t} of page {p} does not match its children's key ranges")
    if lo[0] != 0 or hi[0] != n - 1:
        raise LayoutInvalid("the tree does not cover every key")


@dataclass(frozen=True)
class Cost:
    """What a layout costs on a histogram, all from :func:`evaluate`."""

    expected_page_reads: float
    pages: int
    height: int
    answered_at_depth: np.ndarray  # share of looked-up weight answered at depth 1, 2, ...
    p99_page_reads: int = 0  # reads of the 99th-percentile lookup (weighted by the histogram)
    max_page_reads: int = 0  # most reads of any lookup the histogram gives weight
    max_page_reads_any: int = 0  # most reads of any key or gap at all (looked up or not)


def evaluate(layout: Layout, hist: Histogram) -> Cost:
    """Expected page reads per lookup of ``layout`` under ``hist`` (the only cost function).

    Independent of any optimiser's own objective: depths come from the parent links, the page
    of each key from the page arrays, and each gap's page from its neighbouring keys.
    Complexity O(n + pages * height).
    """
    if layout.n_keys != hist.n:
        raise LayoutInvalid(f"layout covers {layout.n_keys} keys, histogram has {hist.n}")
    n = hist.n
    if n == 0:
        return Cost(0.0, 0, 0, np.zeros(0))
    depth = layout.depths()
    height = int(depth.max())
    key_page, gap_page = end_pages(layout, depth)
    by_depth = np.zeros(height + 1)
    worst_any = int(depths_and_weight(key_page, gap_page, depth, hist.p, hist.q, by_depth))
    total = hist.total
    if total > 0:
        reads = float(np.arange(height + 1) @ by_depth / total)
        shares = by_depth[1:] / total
    else:
        reads, shares = 0.0, np.zeros(height)
    p99, worst = _tail(shares)
    return Cost(reads, layout.pages, height, shares, p99, worst, worst_any)


def _tail(shares: np.ndarray) -> tuple[int, int]:
    """(99th-percentile, largest) page reads of a lookup, from the share answered at each depth."""
    if shares.size == 0 or shares.sum() <= 0:
        return 0, 0
    cum = np.cumsum(shares) / shares.sum()
    p99 = int(np.searchsorted(cum, 0.99 - 1e-12) + 1)
    return p99, int(np.nonzero(shares > 0)[0].max() + 1)


def mean_fill(layout: Layout) -> float:
    """Share of the pages' entry slots in use: keys over pages x c for a classic B-tree; for a
    B+-tree keys over leaves x L and separators over internal pages x (F - 1), pooled."""
    if layout.pages == 0:
        return 0.0
    sizes = layout.page_sizes()
    if layout.structure == "bplus":
        leaves = int(layout.leaf.sum())
        slots = leaves * layout.capacity + (layout.pages - leaves) * max(1, layout.fanout - 1)
        return float(sizes.sum() / slots)
    return float(sizes.sum() / (layout.pages * layout.capacity))


def end_pages(layout: Layout, depth: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Page where each hit (per key) and each miss (per gap) stops: the last page it reads.

    Classic B-tree: a key's own page; a gap's is the deeper of its neighbours' pages (one is an
    ancestor of the other or they share a page). B+-tree: a key's leaf; a gap's is the leaf of
    the key before it (the first leaf for gap 0). ``depth``: the pages' depths, when already at hand.
    """
    n = layout.n_keys
    ids = np.int32 if layout.pages < 2**31 else np.int64  # page ids: half the memory at 10M keys
    key_page = np.empty(n, dtype=ids)
    gap_page = np.empty(n + 1, dtype=ids)
    bplus = layout.structure == "bplus"
    leaf = layout.leaf if bplus and layout.leaf is not None else np.zeros(0, dtype=bool)
    if depth is None:
        depth = layout.depths() if not bplus and n else np.zeros(0, dtype=np.int64)
    start = np.ascontiguousarray(layout.page_start, dtype=np.int64)
    keys = np.ascontiguousarray(layout.page_keys, dtype=rank_dtype(n))  # as built: no copy
    end_pages_kernel(start, keys, n, bplus, leaf, depth, key_page, gap_page)
    return key_page, gap_page


def page_traffic(layout: Layout, hist: Histogram) -> np.ndarray:
    """Lookup weight that reads each page: everything stopping in the page's subtree.

    Sums to expected page reads times total weight, which ties the buffer-pool figures to the
    evaluator's.
    """
    if layout.pages == 0:
        return np.zeros(0)
    key_page, gap_page = end_pages(layout)
    acc = np.bincount(key_page, weights=hist.p, minlength=layout.pages)
    acc += np.bincount(gap_page, weights=hist.q, minlength=layout.pages)
    depth = layout.depths()
    for d in range(int(depth.max()), 1, -1):
        at = np.nonzero(depth == d)[0]
        np.add.at(acc, layout.parent[at], acc[at])
    return acc
