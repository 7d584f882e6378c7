"""The recipes in workloads/: each turns its committed sample into a lookup log; the extracted keys
and counts are checked against what the sample files hold (counted by hand from them), and each
log is then planned end to end, with the database left byte-identical."""

from __future__ import annotations

import hashlib
import json
from collections import Counter
from pathlib import Path

import duckdb
import pytest
from typer.testing import CliRunner

from advisor.cli import app
from advisor.workload import load_workload

HERE = Path(__file__).resolve().parent.parent / "workloads"
runner = CliRunner()

# hand counts from the sample files
APP_LOG = Counter({1040: 4, 2210: 2, 3333: 1, 1111: 2})  # 10 requests, one health check
SQL_POINTS = Counter({1040: 2, 2210: 1, 3333: 1, 1111: 1, 9999: 1})  # =, =, IN (3), = (lower case)
SQL_SCANS = [(1000, 1200), (2200, 2300)]
ACCESS_LOG = Counter({1040: 2, 2210: 1, 7777: 1, 1111: 1, 3333: 1})  # the logo request is not a lookup
COUNTS = Counter({1040: 80, 2210: 7, 3333: 5, 9999: 2})  # two days of Parquet counts


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
    res = _invoke(db, "--keys-per-page", "4", "--json", "--no-frontier", *args)
    assert res.exit_code == 0, res.stderr
    return json.loads(res.stdout)


def test_json_lines_application_log(catalogue):
    rows = _rows("app-log/lookups.sql")
    assert Counter(r[0] for r in rows) == APP_LOG
    times = [r[1] for r in rows]
    assert times == sorted(times) and len(rows) == 9
    before = _digest(catalogue)
    run = _recommend(catalogue, "--log-sql", "app-log/lookups.sql", "--order-column", "logged_at")
    assert run["lookups"] == 9 and run["misses"] == 0
    assert _digest(catalogue) == before


def test_sql_statement_log_points_and_scans(catalogue):
    rows = _rows("sql-log/lookups.sql")
    assert Counter(r[0] for r in rows if r[1] is None) == SQL_POINTS
    assert sorted((r[0], r[1]) for r in rows if r[1] is not None) == SQL_SCANS
    before = _digest(catalogue)
    run = _recommend(catalogue, "--log-sql", "sql-log/lookups.sql", "--scan-to", "scan_to")
    scans = run["plans"][0]["range_scans"]
    assert scans["scans"] == 2 and scans["point_lookups"] == 6
    assert _digest(catalogue) == before


def test_web_access_log(catalogue):
    rows = _rows("access-log/lookups.sql")
    assert Counter(r[0] for r in rows) == ACCESS_LOG
    before = _digest(catalogue)
    run = _recommend(catalogue, "--log-sql", "access-log/lookups.sql")
    assert run["lookups"] == 6 and run["misses"] == 1  # 7777 is not a packet
    assert _digest(catalogue) == before


def test_pre_aggregated_parquet_counts_by_query_and_by_directory(catalogue):
    assert Counter(dict(_rows("counts/lookups.sql"))) == COUNTS
    before = _digest(catalogue)
    by_query = _recommend(catalogue, "--log-sql", "counts/lookups.sql", "--count-column", "n")
    by_dir = _recommend(catalogue, "--log", "counts", "--count-column", "n")
    by_glob = _recommend(catalogue, "--log", "counts/*/*.parquet", "--count-column", "n")
    for run in (by_query, by_dir, by_glob):
        assert run["lookups"] == 94 and run["misses"] == 2
    assert by_dir["plans"][0]["optimized"] == by_query["plans"][0]["optimized"]
    with load_workload(
        catalogue, "packets", "packet_no", None, count_column="n", log_query=(HERE / "counts/lookups.sql").read_text()
    ) as wl:
        assert wl.hist.p.max() == 80 and wl.hist.total == 94
    assert _digest(catalogue) == before


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
