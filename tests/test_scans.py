"""Range scans: the page count against a walk of every key's search path, and the SQL reader."""

from __future__ import annotations

import json

import duckdb
import numpy as np
import pytest
from typer.testing import CliRunner

from advisor.cli import app
from advisor.logreads import load_scans
from advisor.optimize import hot_first_layout, uniform_layout
from advisor.scans import scan_pages
from advisor.workload import load_workload

from .conftest import path_finder, random_hist


def walked_pages(layout, a, b):
    """Every page on the search path of every key in a..b (what an in-order walk reads); an
    empty range walks the path of its gap."""
    path = path_finder(layout)
    if a > b:
        return len(path(a - 0.5))
    pages = set()
    for k in range(a, b + 1):
        pages.update(path(float(k)))
    return len(pages)


@pytest.mark.parametrize("seed", range(3))
@pytest.mark.parametrize("c", [1, 3, 8])
def test_scan_pages_equal_the_walk(seed, c):
    rng = np.random.default_rng(seed)
    hist = random_hist(rng, 300)
    first = rng.integers(0, 300, 60)
    last = np.minimum(299, first + rng.integers(-3, 80, 60))
    for layout in (uniform_layout(300, c), hot_first_layout(hist, c, 1)):
        got = scan_pages(layout, first, last)
        want = [walked_pages(layout, int(a), int(b)) for a, b in zip(first, last, strict=False)]
        assert got.tolist() == want


def test_scan_reader_and_cli(tmp_path):
    db = tmp_path / "s.duckdb"
    con = duckdb.connect(str(db))
    con.execute("CREATE TABLE t AS SELECT range * 10 AS k FROM range(500)").fetchall()
    con.execute(
        "CREATE TABLE lg AS SELECT (hash(range) % 5000)::BIGINT AS k, "
        "CASE WHEN range % 4 = 0 THEN (hash(range) % 5000 + hash(range + 1) % 300)::BIGINT END AS k_to FROM range(4000)"
    ).fetchall()
    rows = con.execute("SELECT k, k_to FROM lg WHERE k_to IS NOT NULL").fetchall()
    con.close()
    keys = np.arange(500) * 10
    with load_workload(db, "t", "k", "lg") as wl:
        first, last, w, points = load_scans(wl, "k_to")
    got = {(int(a), int(b)): float(x) for a, b, x in zip(first, last, w, strict=False)}
    want: dict = {}
    for lo, hi in rows:
        key = (int(np.searchsorted(keys, lo, "left")), int(np.searchsorted(keys, hi, "right")) - 1)
        want[key] = want.get(key, 0.0) + 1.0
    assert got == want
    assert points.total == 3000
    res = CliRunner().invoke(
        app,
        [
            "recommend",
            str(db),
            "--table",
            "t",
            "--key",
            "k",
            "--log",
            "lg",
            "--json",
            "--keys-per-page",
            "6",
            "--scan-to",
            "k_to",
        ],
    )
    assert res.exit_code == 0, res.stderr
    s = json.loads(res.stdout)["plans"][0]["range_scans"]
    assert s["scans"] == 1000 and s["point_lookups"] == 3000
    assert isinstance(s["scans"], int) and isinstance(s["point_lookups"], int)  # whole counts as integers
    for side in ("uniform", "optimized"):
        f = s[side]
        assert f["combined"] == pytest.approx((f["point_lookup_reads"] * 3000 + f["scan_pages"] * 1000) / 4000)
