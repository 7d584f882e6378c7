"""The command line through Typer's CliRunner: report, JSON contract, export round trips, errors."""

from __future__ import annotations

import json

import duckdb
import numpy as np
import pytest
from typer.testing import CliRunner

from advisor.cli import app
from advisor.export import read_layout
from advisor.layout import evaluate
from advisor.workload import load_workload

runner = CliRunner()


@pytest.fixture(scope="module")
def small_db(tmp_path_factory):
    """A small skewed catalogue with a lookup log (invented test data)."""
    path = tmp_path_factory.mktemp("db") / "shop.duckdb"
    rng = np.random.default_rng(0)
    keys = np.sort(rng.choice(np.arange(10, 50_000), 1500, replace=False)).astype(np.int64)
    hot = rng.permutation(keys)[(rng.zipf(1.3, 30_000) - 1) % keys.size]
    misses = rng.integers(0, 60_000, 2000)
    log = np.concatenate([hot, misses]).astype(np.int64)
    con = duckdb.connect(str(path))
    con.register("k_in", {"item_no": keys})
    con.execute("CREATE TABLE items AS SELECT item_no, item_no % 7 AS bin FROM k_in")
    con.register("l_in", {"item_no": log})
    con.execute("CREATE TABLE probes AS SELECT item_no, row_number() OVER () AS seq FROM l_in").fetchall()
    con.close()
    return path


def _plan(db, *extra):
    return runner.invoke(
        app,
        # the frontier re-plans every page size five times; tests of it live in test_budget.py
        ["recommend", str(db), "--table", "items", "--key", "item_no", "--log", "probes", "--no-frontier", *extra],
        env={"COLUMNS": "120"},
    )


def test_report_renders(small_db):
    res = _plan(small_db)
    assert res.exit_code == 0, res.stderr
    out = res.stdout
    assert "Traffic profile" in out and "Page reads per lookup" in out
    assert "test any layout on a copy" in out.lower().replace("\n", " ").replace("│", "").replace("  ", " ")
    for size in ("4,096", "8,192", "16,384"):
        assert size in out


def test_json_follows_the_contract(small_db):
    res = _plan(small_db, "--json", "--page-size", "4096", "--keys-per-page", "16")
    assert res.exit_code == 0, res.stderr
    run = json.loads(res.stdout)
    assert isinstance(run["keys"], int) and run["keys"] == 1500
    assert run["lookups"] == pytest.approx(32_000)
    assert run["hits"] + run["misses"] == pytest.approx(32_000)
    assert len(run["plans"]) == 2
    by_c = {p["keys_per_page"]: p for p in run["plans"]}
    assert by_c[16]["page_size"] is None
    assert by_c[(4096 - 64) // 24]["page_size"] == 4096
    for p in run["plans"]:
        assert isinstance(p["keys_per_page"], int)
        for side in ("optimized", "uniform"):
            assert isinstance(p[side]["expected_page_reads"], float)
            assert isinstance(p[side]["pages"], int) and isinstance(p[side]["height"], int)
        assert isinstance(p["lower_bound"], float) and isinstance(p["proven_optimal"], bool)
        assert p["lower_bound"] <= p["optimized"]["expected_page_reads"] <= p["uniform"]["expected_page_reads"]


@pytest.mark.parametrize(
    "suffix",
    [
        ".csv",
        pytest.param(".json", marks=pytest.mark.slow),
        ".parquet",
        pytest.param(".duckdb", marks=pytest.mark.slow),
    ],
)
def test_export_round_trips_to_the_same_cost(small_db, tmp_path, suffix):
    target = tmp_path / f"layout{suffix}"
    # the near-optimal path alone (no exact re-solve): the export does not depend on how the plan was found
    res = _plan(small_db, "--json", "--keys-per-page", "20", "--exact-seconds", "0", "--export", str(target))
    assert res.exit_code == 0, res.stderr
    run = json.loads(res.stdout)
    assert run["exports"] == [str(target)]
    with load_workload(small_db, "items", "item_no", "probes") as wl:
        layout = read_layout(wl, target, 20)
        cost = evaluate(layout, wl.hist).expected_page_reads
    assert cost == pytest.approx(run["plans"][0]["optimized"]["expected_page_reads"], rel=1e-12)
    assert not list(tmp_path.glob(".*partial*"))


def test_export_one_file_per_page_size_and_refuses_to_overwrite(small_db, tmp_path):
    target = tmp_path / "pages.csv"
    res = _plan(small_db, "--page-size", "4096", "--page-size", "8192", "--export", str(target))
    assert res.exit_code == 0, res.stderr
    assert sorted(p.name for p in tmp_path.iterdir()) == ["pages-4096B.csv", "pages-8192B.csv"]
    again = _plan(small_db, "--page-size", "4096", "--export", str(tmp_path / "pages-4096B.csv"))
    assert again.exit_code == 7 and "--force" in again.stderr
    forced = _plan(small_db, "--page-size", "4096", "--export", str(tmp_path / "pages-4096B.csv"), "--force")
    assert forced.exit_code == 0


@pytest.mark.parametrize(
    "args, code, words",
    [
        (
            ["recommend", "/nonexistent/x.duckdb", "--table", "items", "--key", "item_no", "--log", "probes"],
            3,
            "not found",
        ),
        (["--table", "nope", "--key", "item_no", "--log", "probes"], 3, "table 'nope'"),
        (["--table", "items", "--key", "nope", "--log", "probes"], 3, "column 'nope'"),
        (["--table", "items", "--key", "item_no", "--log", "/no/such.parquet"], 3, "log file not found"),
        (["--table", "items", "--key", "item_no", "--page-size", "80", "--log", "probes"], 5, "minimum is"),
        (["--table", "items", "--key", "item_no", "--keys-per-page", "0", "--log", "probes"], 5, "at least 1"),
        (["--table", "items", "--key", "item_no", "--internal-fill", "1.5", "--log", "probes"], 5, "fill factor"),
        (["--table", "items", "--key", "item_no", "--fill-factor", "0", "--log", "probes"], 5, "fill factor"),
    ],
)
def test_errors_are_one_line_with_their_exit_code(small_db, args, code, words):
    argv = args if args[0] == "recommend" else ["recommend", str(small_db), *args]
    res = runner.invoke(app, argv)
    assert res.exit_code == code, (res.stdout, res.stderr)
    assert words in res.stderr
    assert "Traceback" not in res.stderr + res.stdout
    assert len(res.stderr.strip().splitlines()) == 1


def test_every_command_has_help():
    for cmd in ("recommend", "demo"):
        res = runner.invoke(app, [cmd, "--help"], env={"COLUMNS": "200"})
        assert res.exit_code == 0 and len(res.stdout) > 200
    res = runner.invoke(app, ["recommend", "--help"], env={"COLUMNS": "200"})
    for opt in ("--table", "--key", "--log", "--page-size", "--keys-per-page", "--json", "--export"):
        assert opt in res.stdout


@pytest.mark.slow
def test_demo_runs_small(tmp_path):
    res = runner.invoke(app, ["demo", "--dir", str(tmp_path), "--keys", "3000", "--lookups", "20000", "--json"])
    assert res.exit_code == 0, res.stderr
    run = json.loads(res.stdout)
    assert run["keys"] == 3000 and run["null_lookups"] > 0 and run["misses"] > 0
    again = runner.invoke(app, ["demo", "--dir", str(tmp_path), "--keys", "3000", "--lookups", "20000", "--json"])
    strip = lambda plans: [{k: v for k, v in p.items() if k != "seconds"} for p in plans]  # noqa: E731
    assert strip(json.loads(again.stdout)["plans"]) == strip(run["plans"])  # same file, same figures


@pytest.mark.slow  # several full runs: in the slow suite
def test_buffer_pool_and_lru_replay(small_db):
    res = _plan(
        small_db,
        "--json",
        "--keys-per-page",
        "20",
        "--exact-seconds",
        "0",
        "--order-column",
        "seq",
        "--pool-pages",
        "3",
        "--pool-pages",
        "30",
    )
    run = json.loads(res.stdout)
    (p,) = run["plans"]
    assert [r["pool_pages"] for r in p["buffer_pool"]] == [3, 30]
    for r in p["buffer_pool"]:
        assert r["optimized_pinned"] <= p["optimized"]["expected_page_reads"]
    assert run["inputs"]["replayed_lookups"] == 32_000
    with load_workload(small_db, "items", "item_no", "probes") as wl:
        from advisor.logreads import load_replay

        replay = load_replay(wl, "seq")
        n = wl.hist.n
        np.testing.assert_allclose(np.bincount(replay.outcomes[replay.outcomes < n], minlength=n), wl.hist.p)
        np.testing.assert_allclose(np.bincount(replay.outcomes[replay.outcomes >= n] - n, minlength=n + 1), wl.hist.q)
    assert "Buffer pool" in _plan(small_db, "--keys-per-page", "20", "--exact-seconds", "0").stdout


def test_public_api_runs_the_main_job(small_db):
    import advisor

    with advisor.load_workload(small_db, "items", "item_no", "probes") as wl:
        result = advisor.analyse(wl, advisor.Request(advisor.PageSettings(page_sizes=[8192])))
    (plan,) = result.plans
    advisor.check_layout(plan.recommended)
    assert result.run["plans"][0]["optimized"]["expected_page_reads"] == plan.recommended_cost.expected_page_reads
    assert set(advisor.__all__) <= set(dir(advisor))


@pytest.mark.slow
def test_exact_seconds_chooses_the_solver(tmp_path):
    db = tmp_path / "small.duckdb"
    con = duckdb.connect(str(db))
    con.execute("CREATE TABLE items AS SELECT range * 3 AS item_no FROM range(400)").fetchall()
    con.execute(
        "CREATE TABLE probes AS SELECT ((hash(range) % 37) * (hash(range) % 11) * 3)::BIGINT AS item_no "
        "FROM range(5000)"
    ).fetchall()
    con.close()
    fast = json.loads(_plan(db, "--json", "--keys-per-page", "6", "--exact-seconds", "0").stdout)["plans"][0]
    exact = json.loads(_plan(db, "--json", "--keys-per-page", "6", "--exact-seconds", "60").stdout)["plans"][0]
    assert exact["proven_optimal"] and exact["optimized"]["method"].startswith("exact DP")
    assert "exact DP" not in fast["optimized"]["method"]
    assert exact["optimized"]["expected_page_reads"] <= fast["optimized"]["expected_page_reads"] + 1e-12


def test_export_with_both_structures_writes_one_file_each(small_db, tmp_path):
    res = _plan(small_db, "--model", "both", "--page-size", "4096", "--export", str(tmp_path / "x.csv"))
    assert res.exit_code == 0, res.stderr
    assert sorted(p.name for p in tmp_path.iterdir()) == ["x-4096B-bplus.csv", "x-4096B.csv"]


@pytest.mark.slow
def test_demo_with_both_structures(tmp_path):
    res = runner.invoke(
        app, ["demo", "--dir", str(tmp_path), "--keys", "3000", "--lookups", "20000", "--json", "--model", "both"]
    )
    assert res.exit_code == 0, res.stderr
    assert {p["model"] for p in json.loads(res.stdout)["plans"]} == {"btree", "bplus"}


def test_fill_factors_reach_the_baseline_json_and_report(small_db):
    """--fill-factor / --internal-fill build the even split as a bulk loader fills it, for both
    structures; the JSON gives the fills, the report says them, the advice may fill pages."""
    res = _plan(small_db, "--json", "--page-size", "4096", "--model", "both")
    full = {p["model"]: p for p in json.loads(res.stdout)["plans"]}
    res = _plan(
        small_db, "--json", "--page-size", "4096", "--model", "both", "--fill-factor", "0.6", "--internal-fill", "0.8"
    )
    assert res.exit_code == 0, res.stderr
    for p in json.loads(res.stdout)["plans"]:
        assert p["even_fill"] == {"leaf": 0.6, "internal": 0.8}
        assert p["keys_per_page"] == full[p["model"]]["keys_per_page"]  # the page's slots stay the same
        assert p["uniform"]["pages"] > full[p["model"]]["uniform"]["pages"]
        assert p["uniform"]["mean_fill"] < 0.8
        assert p["optimized"]["pages"] <= p["budget"]["max_pages"]
    text = _plan(small_db, "--page-size", "4096", "--fill-factor", "0.6", "--internal-fill", "0.8").stdout
    assert "leaves 60%, internal pages 80%" in " ".join(text.split())


def _sqlite_copy(small_db, path, keys_filter=""):
    """The catalogue's keys in an SQLite table with a unique index, built from sorted keys."""
    import sqlite3

    with duckdb.connect(str(small_db), read_only=True) as con:
        keys = [int(k) for (k,) in con.execute(f"SELECT item_no FROM items {keys_filter} ORDER BY 1").fetchall()]
    lite = sqlite3.connect(path)
    lite.execute("PRAGMA page_size = 4096")
    lite.execute("CREATE TABLE items (item_no INTEGER, bin INTEGER)")
    lite.executemany("INSERT INTO items VALUES (?, ?)", [(k, k % 7) for k in keys])
    lite.execute("CREATE UNIQUE INDEX items_no ON items (item_no)")
    lite.commit()
    lite.close()
    return keys


def test_current_sqlite_index_is_costed_beside_the_plans(small_db, tmp_path):
    """--current reads the user's SQLite index from its file (the SQLite "Database File Format"
    document; the reader itself is checked against counted reads in test_sqlite_check.py) and
    costs it with the leaf rule on the run's histogram; the file is left unchanged."""
    from advisor.leaf_search import evaluate_leaf_search
    from advisor.sqlite_tree import index_layout

    lite = tmp_path / "copy.sqlite"
    _sqlite_copy(small_db, lite)
    before = lite.read_bytes()
    res = _plan(small_db, "--json", "--page-size", "4096", "--current", f"sqlite:{lite}:items_no")
    assert res.exit_code == 0, res.stderr
    run = json.loads(res.stdout)
    cur = run["current"]
    layout, _keys, pages = index_layout(lite, "items_no")
    with load_workload(small_db, "items", "item_no", "probes") as wl:
        expected = evaluate_leaf_search(layout, wl.hist)
    assert cur["expected_page_reads"] == pytest.approx(expected)
    assert cur["pages"] == len(pages) and cur["page_size"] == 4096
    assert 1 <= cur["expected_page_reads"] <= cur["height"]
    assert lite.read_bytes() == before
    text = _plan(small_db, "--page-size", "4096", "--current", f"sqlite:{lite}:items_no").stdout
    assert "Your current index" in text and "your index" in text


@pytest.mark.parametrize(
    "spec, code, words",
    [
        ("postgres:x:y", 5, "sqlite:PATH:INDEX"),
        ("sqlite:/no/such.sqlite:idx", 3, "not found"),
        ("sqlite:{lite}:no_such_index", 4, "no index"),
        ("sqlite:{half}:items_no", 4, "same keys"),
    ],
)
def test_current_index_errors_are_one_line(small_db, tmp_path, spec, code, words):
    lite, half = tmp_path / "copy.sqlite", tmp_path / "half.sqlite"
    _sqlite_copy(small_db, lite)
    _sqlite_copy(small_db, half, "WHERE item_no % 2 = 0")
    res = _plan(small_db, "--page-size", "4096", "--current", spec.format(lite=lite, half=half))
    assert res.exit_code == code, (res.stdout, res.stderr)
    assert words in res.stderr and len(res.stderr.strip().splitlines()) == 1
