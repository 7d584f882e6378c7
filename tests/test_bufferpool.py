"""Buffer-pool figures against an independent page-by-page simulation and cachetools' LRU."""

from __future__ import annotations

from collections import Counter

import numpy as np
import pytest
from cachetools import LRUCache  # test-only dependency: a well-kept general-purpose LRU

from advisor.bufferpool import Replay, lru_misses, lru_plain, pinned_misses, pool_figures, pool_sizes
from advisor.histogram import Histogram
from advisor.layout import evaluate, page_traffic
from advisor.optimize import hot_first_layout, uniform_layout

from .conftest import path_finder


def _log(rng, n, lookups):
    """A random ordered log: outcome ids (k: hit on key k; n + g: miss in gap g) and its histogram."""
    ids = rng.integers(0, 2 * n + 1, lookups)
    ids = np.where(rng.random(lookups) < 0.7, rng.zipf(1.4, lookups) % n, ids)
    p = np.bincount(ids[ids < n], minlength=n).astype(float)
    q = np.bincount(ids[ids >= n] - n, minlength=n + 1).astype(float)
    return ids, Histogram(p, q)


def _value(i, n):
    return float(i) if i < n else (i - n) - 0.5


@pytest.mark.parametrize("seed", range(3))
def test_pinned_cache_matches_simulation(seed):
    rng = np.random.default_rng(seed)
    n = 400
    ids, hist = _log(rng, n, 3000)
    for layout in (uniform_layout(n, 4), hot_first_layout(hist, 4, 1)):
        reads = Counter()
        path = path_finder(layout)
        for i in ids:
            reads.update(path(_value(int(i), n)))
        total_reads = sum(reads.values())
        assert total_reads / ids.size == pytest.approx(evaluate(layout, hist).expected_page_reads, rel=1e-12)
        traffic = page_traffic(layout, hist)
        assert np.allclose([reads[p] for p in range(layout.pages)], traffic)
        for b in (1, 3, 10, 50):
            hottest = sum(c for _, c in reads.most_common(b))
            assert pinned_misses(layout, hist, [b])[0] == pytest.approx((total_reads - hottest) / ids.size, rel=1e-12)


@pytest.mark.parametrize("seed", range(3))
def test_lru_replay_matches_cachetools(seed):
    rng = np.random.default_rng(seed + 10)
    n = 300
    ids, hist = _log(rng, n, 2000)
    replay = Replay(ids, n)
    for layout in (uniform_layout(n, 3), hot_first_layout(hist, 3, 1)):
        sizes = [1, 2, 5, 20, 200]
        ours = lru_misses(layout, replay, sizes)  # the compiled kernel
        assert ours == lru_plain(layout, replay, sizes)  # the OrderedDict version it replaced
        path = path_finder(layout)
        for b, mine in zip(sizes, ours, strict=False):
            cache = LRUCache(maxsize=b)
            misses = 0
            for i in ids:
                for page in path(_value(int(i), n)):
                    if page in cache:
                        cache[page]  # a read refreshes recency
                    else:
                        misses += 1
                        cache[page] = True
            assert mine == pytest.approx(misses / ids.size, rel=1e-12)


def test_pool_figures_shape_and_monotone():
    rng = np.random.default_rng(5)
    ids, hist = _log(rng, 2000, 5000)
    uni, adv = uniform_layout(2000, 8), hot_first_layout(hist, 8, 1)
    rows = pool_figures(uni, adv, hist, Replay(ids, 2000))
    assert [r["pool_pages"] for r in rows] == pool_sizes(uni.pages)
    for key in ("uniform_pinned", "optimized_pinned", "uniform_lru", "optimized_lru"):
        vals = [r[key] for r in rows]
        assert all(a >= b - 1e-12 for a, b in zip(vals, vals[1:], strict=False))  # more pool, no more misses
    # pinning every page leaves no misses
    assert pinned_misses(uni, hist, [uni.pages])[0] == pytest.approx(0.0, abs=1e-12)
