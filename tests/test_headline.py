"""The advice per plan (advisor.headline): held-out saving, where to build, what the cache does.

The pool figures are checked against an independent replay (tests/conftest.py's page-by-page
search walk, which shares no code with advisor's path helpers): pin the pool's hottest pages by
replayed traffic and count the pages a lookup still reads.
"""

from __future__ import annotations

import duckdb
import numpy as np
import pytest

import advisor
from advisor.headline import advice_items, drift_warnings, where_to_build

from .conftest import path_finder


@pytest.fixture(scope="module")
def db(tmp_path_factory):
    """Invented test data: 3,000 keys; the early lookups favour low keys, the late ones high keys."""
    path = tmp_path_factory.mktemp("headline") / "h.duckdb"
    rng = np.random.default_rng(5)
    keys = np.arange(3000, dtype=np.int64) * 2
    steady = keys[(rng.zipf(1.4, 12_000) - 1) % 3000]
    early = keys[(rng.zipf(1.3, 6000) - 1) % 300]
    late = keys[2999 - (rng.zipf(1.3, 6000) - 1) % 300]
    con = duckdb.connect(str(path))
    con.execute("CREATE TABLE items (item_no BIGINT)")
    con.execute("INSERT INTO items SELECT * FROM keys")
    con.execute("CREATE TABLE steady AS SELECT unnest($1::BIGINT[]) AS item_no", [steady.tolist()])
    seq = np.concatenate([early, late])
    con.execute(
        "CREATE TABLE drifting AS SELECT unnest($1::BIGINT[]) AS item_no, unnest($2::BIGINT[]) AS seq",
        [seq.tolist(), list(range(seq.size))],
    )
    con.close()
    return str(path)


def _run(db, log, **req):
    with advisor.load_workload(db, "items", "item_no", log) as wl:
        settings = advisor.PageSettings(page_sizes=[req.pop("page_size", 1024)], model=req.pop("model", "btree"))
        result = advisor.analyse(wl, advisor.Request(settings, frontier=False, exact_seconds=0, **req))
        return result, wl.hist


def _pinned_misses(layout, hist, pool: int) -> float:
    """Pages a lookup reads with the ``pool`` most-read pages pinned, by walking every search."""
    path = path_finder(layout)
    walks = [(path(float(r)), w) for r, w in enumerate(hist.p) if w > 0]
    walks += [(path(g - 0.5), w) for g, w in enumerate(hist.q) if w > 0]
    traffic = np.zeros(layout.pages)
    for pages, w in walks:
        traffic[pages] += w
    pinned = set(np.argsort(-traffic, kind="stable")[:pool].tolist())
    return sum(w * sum(pg not in pinned for pg in pages) for pages, w in walks) / hist.total


def test_a_pool_smaller_than_the_index_gives_its_misses(db):
    result, hist = _run(db, "steady", pool_bytes=8 * 1024)
    (item,) = result.run["advice"]
    (plan,) = result.plans
    assert item["fits_in_pool"] is False and item["pool_bytes"] == 8 * 1024
    assert item["even_pool_misses"] == pytest.approx(_pinned_misses(plan.uniform, hist, 8))
    assert item["advised_pool_misses"] == pytest.approx(_pinned_misses(plan.recommended, hist, 8))
    assert "8.0 KiB pool" in item["text"] and item["text"].index("build:") < item["text"].index("cache:")


def test_an_index_inside_the_pool_leads_with_the_cache(db):
    result, _ = _run(db, "steady", pool_bytes=1 << 30)
    (item,) = result.run["advice"]
    assert item["fits_in_pool"] is True
    lines = item["text"].splitlines()
    assert lines[1].startswith("  cache:") and "saves no I/O" in lines[1]


def test_without_a_pool_it_says_none_was_given(db):
    result, _ = _run(db, "steady")
    (item,) = result.run["advice"]
    assert item["fits_in_pool"] is None and "no --pool-bytes given" in item["text"]
    assert item["held_out_saving"] is None and result.run["disclaimer"].startswith("Advice only")


def test_drift_shows_in_the_headline_and_warns(db):
    result, _ = _run(db, "drifting", order_column="seq", holdout=0.5)
    run = result.run
    (item,) = run["advice"]
    (row,) = run["holdout"]["rows"]
    assert item["held_out_saving"] == row["held_out"]["saving"]
    assert "on the latest 50% of the log" in item["text"]
    assert row["held_out"]["saving"] < 0.5 * row["in_sample"]["saving"]  # the data drifts by construction
    assert any("hot keys drift" in w for w in run["warnings"])


def test_steady_log_has_no_drift_warning():
    run = {
        "plans": [{"keys_per_page": 8, "page_size": None, "model": "btree", "saving": 0.3}],
        "holdout": {
            "fraction": 0.2,
            "rows": [
                {
                    "keys_per_page": 8,
                    "page_size": None,
                    "model": "btree",
                    "smoothing": 0.0,
                    "in_sample": {"saving": 0.3},
                    "held_out": {"saving": 0.2},
                }
            ],
        },
    }
    assert drift_warnings(run) == []
    run["holdout"]["rows"][0]["held_out"]["saving"] = 0.1
    assert len(drift_warnings(run)) == 1


def test_where_to_build_follows_the_leaf_depths(db):
    result, _ = _run(db, "steady", model="bplus")
    (plan,) = result.run["plans"]
    (item,) = result.run["advice"]
    depths = plan["optimized"]["leaf_depths"]
    assert depths == sorted({int(d) for d in result.plans[0].recommended.depths()[result.plans[0].recommended.leaf]})
    assert item["one_leaf_depth"] == (len(depths) == 1)
    one = where_to_build({"model": "bplus", "optimized": {"leaf_depths": [3]}})
    two = where_to_build({"model": "bplus", "optimized": {"leaf_depths": [2, 3]}})
    assert "one depth" in one and "cannot hold" in two
    assert "write yourself" in where_to_build({"model": "btree", "optimized": {}})
    assert advice_items({"plans": [], "holdout": None}, None) == []
