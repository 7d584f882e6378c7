"""The recipes in workloads/ run against the demo database: each turns its committed sample (cut
from the demo's own desk log, thousands of lookups) into a lookup log; the extracted keys are
checked against the sample counted without the recipe (Python's json and re), hits against
DuckDB's own join, and the database is left byte-identical."""

from __future__ import annotations

import hashlib
import json
import re
from collections import Counter
from pathlib import Path

import duckdb
import numpy as np
import pytest
from typer.testing import CliRunner

from advisor.cli import app

HERE = Path(__file__).resolve().parent.parent / "workloads"
runner = CliRunner()


@pytest.fixture()
def demo(tmp_path_factory, monkeypatch):
    """The database `advisor demo` builds (the defaults: the samples were cut from its desk log by
    workloads/make_samples.py); the recipes read their samples relative to workloads/."""
    from advisor.demo import build_demo

    db = build_demo(tmp_path_factory.getbasetemp() / "demo")
    monkeypatch.chdir(HERE)
    return db


@pytest.fixture()
def catalogue(tmp_path, monkeypatch):
    """Packets 1000..3400 in steps of 10 plus the sample's 1111 and 3333 (invented); the recipes
    read their samples by paths relative to workloads/."""
    db = tmp_path / "library.duckdb"
    con = duckdb.connect(str(db))
    con.execute(
        "CREATE TABLE packets AS SELECT packet_no::BIGINT AS packet_no FROM "
        "(SELECT range AS packet_no FROM range(1000, 3400, 10) UNION ALL SELECT 1111 UNION ALL SELECT 3333)"
    ).fetchall()
    con.close()
    monkeypatch.chdir(HERE)
    return db


def _digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def _rows(sql_file: str) -> list[tuple]:
    con = duckdb.connect()
    try:
        return con.execute((HERE / sql_file).read_text()).fetchall()
    finally:
        con.close()


def _invoke(db, *args):
    """``advisor recommend`` on the invented catalogue's key column."""
    return runner.invoke(app, ["recommend", str(db), "--table", "packets", "--key", "packet_no", *args])


def _recommend(db, *args):
    res = _invoke(db, "--page-size", "4096", "--json", "--no-frontier", "--exact-seconds", "0", *args)
    assert res.exit_code == 0, res.stderr
    return json.loads(res.stdout)


def _app_counts() -> Counter:
    """The app log's lookups counted by Python's json module (not the recipe)."""
    lines = (json.loads(x) for x in (HERE / "app-log" / "requests.jsonl").read_text().splitlines())
    return Counter(x["request"]["packet"] for x in lines if "request" in x)


def _sql_counts() -> tuple[Counter, list[tuple[int, int]]]:
    """The statement log's point lookups and scans counted by Python's re module (not the recipe)."""
    points, scans = Counter(), []
    for line in (HERE / "sql-log" / "statements.log").read_text().splitlines():
        stmt = line[20:]
        if not re.search(r"(?i)from\s+packets\s+where", stmt):
            continue
        if m := re.search(r"(?i)packet_no\s+in\s*\(([^)]*)\)", stmt):
            points.update(int(x) for x in re.findall(r"[0-9]+", m.group(1)))
        elif m := re.search(r"(?i)packet_no\s+between\s+([0-9]+)\s+and\s+([0-9]+)", stmt):
            scans.append((int(m.group(1)), int(m.group(2))))
        elif m := re.search(r"(?i)packet_no\s*=\s*([0-9]+)", stmt):
            points[int(m.group(1))] += 1
    return points, sorted(scans)


def _access_counts() -> Counter:
    out = Counter()
    for line in (HERE / "access-log" / "access.log").read_text().splitlines():
        url = line.split('"')[1].split()[1]
        if m := re.match(r"^/packets/([0-9]+)", url) or re.search(r"[?&]packet=([0-9]+)", url):
            out[int(m.group(1))] += 1
    return out


def _hits(db: Path, counts: Counter) -> int:
    """Lookups of existing packets, by DuckDB's own join (the count recommend must agree with)."""
    con = duckdb.connect(str(db), read_only=True)
    con.register("c", {"k": np.array(list(counts), dtype=np.int64), "n": np.array(list(counts.values()))})
    (hits,) = con.execute("SELECT coalesce(sum(n), 0) FROM c JOIN packets ON packets.packet_no = c.k").fetchone()
    con.close()
    return int(hits)


def test_json_lines_application_log(demo):
    rows = _rows("app-log/lookups.sql")
    assert Counter(r[0] for r in rows) == _app_counts() and len(rows) >= 2500
    times = [r[1] for r in rows]
    assert times == sorted(times)
    before = _digest(demo)
    run = _recommend(demo, "--log-sql", "app-log/lookups.sql")
    assert run["lookups"] == len(rows) and run["hits"] == _hits(demo, _app_counts()) >= 2000
    assert run["misses"] == len(rows) - run["hits"] > 0
    assert _digest(demo) == before


def test_sql_statement_log_points_and_scans(demo):
    rows = _rows("sql-log/lookups.sql")
    points, scans = _sql_counts()
    assert Counter(r[0] for r in rows if r[1] is None) == points
    assert sorted((r[0], r[1]) for r in rows if r[1] is not None) == scans
    before = _digest(demo)
    run = _recommend(demo, "--log-sql", "sql-log/lookups.sql", "--scan-to", "scan_to")
    s = run["plans"][0]["range_scans"]
    assert s["scans"] == len(scans) > 50 and s["point_lookups"] == sum(points.values()) > 2000
    assert run["hits"] >= _hits(demo, points)  # scans that start on a packet count as hits too
    assert _digest(demo) == before


def test_web_access_log(demo):
    rows = _rows("access-log/lookups.sql")
    counts = _access_counts()
    assert Counter(r[0] for r in rows) == counts
    before = _digest(demo)
    run = _recommend(demo, "--log-sql", "access-log/lookups.sql")
    assert run["lookups"] == sum(counts.values()) >= 2000 and run["hits"] == _hits(demo, counts)
    assert run["misses"] > 0  # the 404s
    assert _digest(demo) == before


def test_pre_aggregated_parquet_counts_by_query_and_by_directory(demo):
    con = duckdb.connect()
    plain = Counter(
        dict(con.execute("SELECT packet_no, sum(n) FROM read_parquet('counts/*/*.parquet') GROUP BY 1").fetchall())
    )
    con.close()
    assert Counter(dict(_rows("counts/lookups.sql"))) == plain
    before = _digest(demo)
    by_query = _recommend(demo, "--log-sql", "counts/lookups.sql", "--count-column", "n")
    by_dir = _recommend(demo, "--log", "counts", "--count-column", "n")
    for run in (by_query, by_dir):
        assert run["lookups"] == sum(plain.values()) >= 10_000 and run["hits"] == _hits(demo, plain)
    assert by_dir["plans"][0]["optimized"] == by_query["plans"][0]["optimized"]
    assert _digest(demo) == before


def test_log_sql_that_writes_is_refused_and_changes_nothing(catalogue, tmp_path):
    before = _digest(catalogue)
    bad = tmp_path / "bad.sql"
    bad.write_text("DELETE FROM packets")
    res = _invoke(catalogue, "--log-sql", str(bad))
    assert res.exit_code == 4 and "--log-sql" in res.stderr and len(res.stderr.strip().splitlines()) == 1
    missing = _invoke(catalogue, "--log-sql", str(tmp_path / "none.sql"))
    assert missing.exit_code == 3
    both = _invoke(catalogue, "--log", "counts", "--log-sql", "counts/lookups.sql")
    assert both.exit_code == 5
    assert _digest(catalogue) == before
