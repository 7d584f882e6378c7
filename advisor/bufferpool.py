"""What a buffer pool of B pages changes: page misses per lookup for any layout.

Two models, both per lookup of the histogram's (or the log's) traffic:

* pinned: the ideal static cache that keeps the B most-read pages resident. Exact from each
  page's access weight (``page_traffic``): misses = (all page reads - reads of the top B) / total.
* LRU: the log replayed in its own order through a least-recently-used pool of B pages (every
  page on a lookup's root-to-end path is touched, root first), starting cold.
"""

from __future__ import annotations

from collections import OrderedDict
from dataclasses import dataclass

import numpy as np

from .histogram import Histogram
from .layout import Layout, end_pages, page_traffic
from .lru_kernel import lru_miss_count

DEFAULT_POOL_FRACTIONS = (0.001, 0.003, 0.01, 0.03, 0.1)


def pool_sizes(index_pages: int, fractions=DEFAULT_POOL_FRACTIONS, pages: list[int] | None = None) -> list[int]:
    """Pool sizes in pages: explicit ones, else the fractions of the index, at least one page."""
    if pages:
        return sorted(set(int(b) for b in pages))
    return sorted(set(max(1, int(round(f * index_pages))) for f in fractions))


def pinned_misses(layout: Layout, hist: Histogram, sizes: list[int]) -> list[float]:
    """Misses per lookup with the B hottest pages pinned, for each B in ``sizes``."""
    if hist.total <= 0 or layout.pages == 0:
        return [0.0 for _ in sizes]
    traffic = np.sort(page_traffic(layout, hist))[::-1]
    cum = np.concatenate([[0.0], np.cumsum(traffic)])
    all_reads = cum[-1]
    return [float((all_reads - cum[min(b, traffic.size)]) / hist.total) for b in sizes]


def lookup_paths(layout: Layout) -> np.ndarray:
    """(pages, height) matrix: row p is the root-to-p path, padded with -1."""
    depth = layout.depths()
    h = int(depth.max()) if depth.size else 0
    paths = np.full((layout.pages, h), -1, dtype=np.int64)
    cur = np.arange(layout.pages)
    for step in range(h):
        alive = cur >= 0
        paths[alive, depth[alive] - 1 - step] = cur[alive]
        cur = np.where(alive, layout.parent[np.maximum(cur, 0)], -1)
    return paths


@dataclass(frozen=True)
class Replay:
    """A log in its own order as outcome ids: key rank k for a hit, n + g for a miss in gap g."""

    outcomes: np.ndarray
    n_keys: int


def stop_pages(layout: Layout, replay: Replay) -> np.ndarray:
    """Per lookup, in log order, the page where it stops."""
    key_page, gap_page = end_pages(layout)
    # outcome ids index keys then gaps, so one table of 2n + 1 page ids answers every lookup in a
    # single gather (int32: a 10M-row replay needs 40 MB here, not the 400 MB of a where/clip)
    table = np.concatenate([key_page, gap_page]).astype(np.int32)
    return table[replay.outcomes]


def replay_access_sequence(layout: Layout, replay: Replay) -> list[np.ndarray]:
    """Per lookup, the pages it reads, root first (as arrays, in log order)."""
    return lookup_paths(layout)[stop_pages(layout, replay)]


def lru_misses(layout: Layout, replay: Replay, sizes: list[int]) -> list[float]:
    """Misses per lookup of an LRU pool of each size over the replayed log (cold start)."""
    if replay.outcomes.size == 0 or layout.pages == 0:
        return [0.0 for _ in sizes]
    stop = np.ascontiguousarray(stop_pages(layout, replay), dtype=np.int32)
    paths = np.ascontiguousarray(lookup_paths(layout), dtype=np.int64)
    return [lru_miss_count(stop, paths, int(b)) / replay.outcomes.size for b in sizes]


def lru_plain(layout: Layout, replay: Replay, sizes: list[int]) -> list[float]:
    """The same with an ``OrderedDict`` per size: the reference the compiled kernel is tested against."""
    if replay.outcomes.size == 0 or layout.pages == 0:
        return [0.0 for _ in sizes]
    seq = replay_access_sequence(layout, replay).ravel()
    seq = seq[seq >= 0].tolist()
    out = []
    for b in sizes:
        pool: OrderedDict[int, None] = OrderedDict()
        misses = 0
        for page in seq:
            if page in pool:
                pool.move_to_end(page)
            else:
                misses += 1
                pool[page] = None
                if len(pool) > b:
                    pool.popitem(last=False)
        out.append(misses / replay.outcomes.size)
    return out


def pool_figures(
    uniform: Layout, advised: Layout, hist: Histogram, replay: Replay | None = None, pages: list[int] | None = None
) -> list[dict]:
    """One row per pool size: pinned (and LRU when a replay is given) misses per lookup, both layouts."""
    sizes = pool_sizes(uniform.pages, pages=pages)
    rows = {
        "uniform_pinned": pinned_misses(uniform, hist, sizes),
        "optimized_pinned": pinned_misses(advised, hist, sizes),
    }
    if replay is not None:
        rows["uniform_lru"] = lru_misses(uniform, replay, sizes)
        rows["optimized_lru"] = lru_misses(advised, replay, sizes)
    out = []
    for i, b in enumerate(sizes):
        row = {"pool_pages": b, "share_of_index": b / uniform.pages if uniform.pages else 0.0}
        row |= {k: v[i] for k, v in rows.items()}
        out.append(row)
    return out


def pool_to_match(even: Layout, advised: Layout, hist: Histogram, pool: int) -> int:
    """Fewest pinned pages the even split needs to miss no more than the advised layout does
    with ``pool`` pages: the advice's worth in buffer-pool memory is (that - pool) pages.
    Exact on the pinned curves (misses fall as pages are added, hottest first)."""
    target = pinned_misses(advised, hist, [pool])[0]
    if hist.total <= 0 or even.pages == 0:
        return pool
    traffic = np.sort(page_traffic(even, hist))[::-1]
    cum = np.concatenate([[0.0], np.cumsum(traffic)])
    misses = (cum[-1] - cum) / hist.total  # misses[b] with b pages pinned, non-increasing
    return int(np.argmax(misses <= target + 1e-12))
