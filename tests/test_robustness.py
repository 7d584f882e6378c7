"""Bad input, odd data and failures: one-line errors with documented codes, nothing touched."""

from __future__ import annotations

import hashlib
import json
import os
import signal
import subprocess
import sys
from pathlib import Path

import duckdb
import numpy as np
import pytest
from typer.testing import CliRunner

from advisor.cli import app
from advisor.workload import load_workload

runner = CliRunner()


def make(path: Path, statements: list[str]) -> Path:
    con = duckdb.connect(str(path))
    for sql in statements:
        con.execute(sql).fetchall()
    con.close()
    return path


def plan(db, *args, table="t", key="k", log="lg"):
    argv = ["recommend", str(db), "--table", table, "--key", key]
    if log is not None:
        argv += ["--log", log]
    return runner.invoke(app, argv + list(args), env={"COLUMNS": "120"})


def one_line_error(res, code, *words):
    assert res.exit_code == code, (res.exit_code, res.stdout, res.stderr)
    err = res.stderr.strip()
    assert len(err.splitlines()) == 1 and "Traceback" not in err
    for w in words:
        assert w in err, err
    return err


@pytest.fixture
def basic(tmp_path):
    return make(
        tmp_path / "b.duckdb",
        [
            "CREATE TABLE t AS SELECT range::INTEGER AS k FROM range(0, 1000, 3)",
            "CREATE TABLE lg AS SELECT (range % 1100)::INTEGER AS k FROM range(5000)",
            "CREATE TABLE words AS SELECT 'w' || range AS k FROM range(10)",
            "CREATE TABLE counted AS SELECT * FROM (VALUES (3, 2.0), (6, -1.0)) v(k, n)",
            "CREATE TABLE frac AS SELECT * FROM (VALUES (3, 2.5)) v(k, n)",
            "CREATE TABLE nan AS SELECT * FROM (VALUES (3, 'nan'::DOUBLE)) v(k, n)",
            "CREATE TABLE nulln AS SELECT * FROM (VALUES (3, NULL::BIGINT)) v(k, n)",
        ],
    )


def test_incomparable_log_type_names_both_types(basic):
    one_line_error(plan(basic, log="words"), 4, "VARCHAR", "INTEGER")


@pytest.mark.parametrize("table, what", [("counted", "negative"), ("nan", "NaN"), ("nulln", "NULL")])
def test_bad_count_columns(basic, table, what):
    one_line_error(plan(basic, "--count-column", "n", log=table), 4, what)


def test_fractional_counts_are_weights(tmp_path):
    """A sampled log scaled by its rate: fractional counts are weights (exit 4 before); the
    figures are weights, the inputs say how many rows were fractional, and the ordered LRU
    replay repeats rows by rounded running totals."""
    from advisor.logreads import whole_repeats

    db = make(
        tmp_path / "f.duckdb",
        [
            "CREATE TABLE t AS SELECT range * 3 AS k FROM range(40)",
            "CREATE TABLE lg AS SELECT * FROM "
            "(VALUES (3, 2.5, 1), (6, 0.25, 2), (7, 1.0, 3), (3, 0.5, 4)) v(k, n, seq)",
        ],
    )
    run = _json(plan(db, "--json", "--count-column", "n", "--keys-per-page", "4", "--order-column", "seq"))
    assert run["lookups"] == pytest.approx(4.25) and run["hits"] == pytest.approx(3.25) and run["misses"] == 1
    assert run["inputs"]["fractional_count_rows"] == 3
    assert whole_repeats(np.array([2.5, 0.25, 1.0, 0.5])).tolist() == [3, 0, 1, 0]  # running 2.5, 2.75, 3.75, 4.25
    assert whole_repeats(np.array([1.0, 4.0, 2.0])).tolist() == [1, 4, 2]


def test_files_that_are_not_what_they_claim(basic, tmp_path):
    (tmp_path / "log.txt").write_text("k\n1\n")
    one_line_error(plan(basic, log=str(tmp_path / "log.txt")), 4, "neither")
    (tmp_path / "bad.parquet").write_bytes(b"not parquet at all" * 10)
    one_line_error(plan(basic, log=str(tmp_path / "bad.parquet")), 4, "Parquet")
    (tmp_path / "fake.duckdb").write_bytes(b"hello" * 1000)
    one_line_error(plan(tmp_path / "fake.duckdb"), 4, "not a DuckDB")
    one_line_error(plan(tmp_path), 4, "directory")


def test_export_to_missing_directory_or_bad_suffix(basic, tmp_path):
    one_line_error(plan(basic, "--export", str(tmp_path / "nope" / "x.csv")), 7, "does not exist")
    one_line_error(plan(basic, "--export", str(tmp_path / "x.xlsx")), 7, ".csv")
    assert not (tmp_path / "x.xlsx").exists()


def _json(res):
    assert res.exit_code == 0, res.stderr
    return json.loads(res.stdout)


def test_empty_table(tmp_path):
    db = make(tmp_path / "e.duckdb", ["CREATE TABLE t (k INTEGER)", "CREATE TABLE lg AS SELECT 5 AS k"])
    run = _json(plan(db, "--json"))
    assert run["keys"] == 0 and run["misses"] == 1
    for p in run["plans"]:
        assert p["optimized"]["pages"] == 0 and p["uniform"]["pages"] == 0
    assert "no keys" in plan(db).stdout


def test_empty_log_keeps_the_even_split(tmp_path):
    db = make(
        tmp_path / "e.duckdb", ["CREATE TABLE t AS SELECT range AS k FROM range(5000)", "CREATE TABLE lg (k BIGINT)"]
    )
    run = _json(plan(db, "--json"))
    for p in run["plans"]:
        assert p["optimized"]["pages"] == p["uniform"]["pages"] and p["proven_optimal"]
        assert p["uniform"]["height"] >= 1
    assert "nothing to optimise" in plan(db).stdout


@pytest.mark.slow  # several full runs: in the slow suite
def test_only_misses_single_key_and_equal_weights(tmp_path):
    db = make(
        tmp_path / "m.duckdb",
        [
            "CREATE TABLE t AS SELECT range * 2 AS k FROM range(3000)",
            "CREATE TABLE lg AS SELECT range * 2 + 1 AS k FROM range(3000)",
            "CREATE TABLE one AS SELECT 42 AS k",
            "CREATE TABLE flat AS SELECT range * 2 AS k FROM range(3000)",
        ],
    )
    run = _json(plan(db, "--json", "--keys-per-page", "8"))
    assert run["hits"] == 0 and run["misses"] == 3000
    p = run["plans"][0]
    assert p["optimized"]["expected_page_reads"] <= p["uniform"]["expected_page_reads"]
    single = _json(plan(db, "--json", table="one"))
    assert single["keys"] == 1 and all(p["optimized"]["pages"] == 1 for p in single["plans"])
    flat = _json(plan(db, "--json", "--keys-per-page", "5", log="flat"))["plans"][0]
    assert flat["optimized"]["expected_page_reads"] <= flat["uniform"]["expected_page_reads"] + 1e-12


def test_duplicates_need_a_flag_and_null_keys_are_counted(tmp_path):
    db = make(
        tmp_path / "d.duckdb",
        [
            "CREATE TABLE t AS SELECT (range // 2) AS k FROM range(200) UNION ALL SELECT NULL",
            "CREATE TABLE lg AS SELECT range AS k FROM range(150)",
        ],
    )
    one_line_error(plan(db), 4, "--distinct-keys")
    run = _json(plan(db, "--json", "--distinct-keys"))
    assert run["keys"] == 100
    assert run["inputs"]["duplicate_rows"] == 100 and run["inputs"]["null_keys"] == 1


def test_odd_strings_set_the_key_width(tmp_path):
    db = make(
        tmp_path / "s.duckdb",
        [
            "CREATE TABLE t AS SELECT * FROM (VALUES (''), ('Ünïcødé ✓'), ('日本語'), (repeat('x', 3000)), ('a')) v(k)",
            "CREATE TABLE lg AS SELECT * FROM (VALUES (''), ('日本語'), ('zz'), (NULL)) v(k)",
        ],
    )
    run = _json(plan(db, "--json", "--page-size", "65536"))
    kb = run["inputs"]["key_bytes"]
    expected = (0 + len("Ünïcødé ✓".encode()) + len("日本語".encode()) + 3000 + 1) / 5 + 2
    assert kb == pytest.approx(expected, abs=0.01)
    assert run["null_lookups"] == 1 and run["hits"] == 2 and run["misses"] == 1
    one_line_error(plan(db, "--page-size", "512"), 5, "minimum is")


@pytest.mark.parametrize(
    "key_type, log_type, log_values, hits",
    [
        ("INTEGER", "BIGINT", "(1), (2), (99999999999)", 2),
        ("DATE", "TIMESTAMP", "('2024-01-02 00:00:00'), ('2024-01-02 10:00:00'), ('2023-12-31 00:00:00')", 1),
    ],
)
def test_comparable_but_different_types(tmp_path, key_type, log_type, log_values, hits):
    first = "'2024-01-01'::DATE + range::INTEGER" if key_type == "DATE" else "range::INTEGER"
    db = make(
        tmp_path / "c.duckdb",
        [
            f"CREATE TABLE t AS SELECT ({first})::{key_type} AS k FROM range(1, 10)",
            f"CREATE TABLE lg AS SELECT k::{log_type} AS k FROM (VALUES {log_values}) v(k)",
        ],
    )
    run = _json(plan(db, "--json"))
    assert run["hits"] == hits and run["misses"] == 3 - hits


def _digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def test_database_is_byte_identical_after_runs(basic, tmp_path):
    before = _digest(basic)
    mtime = os.stat(basic).st_mtime_ns
    assert plan(basic, "--json").exit_code == 0
    assert plan(basic, "--export", str(tmp_path / "x.parquet")).exit_code == 0
    plan(basic, log="words")  # a failing run too
    assert _digest(basic) == before and os.stat(basic).st_mtime_ns == mtime
    assert not Path(str(basic) + ".wal").exists()


def test_locked_database(basic):
    holder = subprocess.Popen(
        [
            sys.executable,
            "-c",
            f"import duckdb, time; c = duckdb.connect({str(basic)!r}); print('ok', flush=True); time.sleep(30)",
        ],
        stdout=subprocess.PIPE,
        text=True,
    )
    try:
        assert holder.stdout.readline().strip() == "ok"
        one_line_error(plan(basic), 6, "locked")
    finally:
        holder.kill()
        holder.wait()


@pytest.mark.parametrize("phase", ["start", "read", "plan", pytest.param("export", marks=pytest.mark.slow)])
def test_ctrl_c_leaves_no_partial_file(tmp_path, phase):
    """SIGINT sent once the run says it reached a phase (ADVISOR_PAUSE_AT, a test hook that
    waits there): exit 130, the one-line message, no output and no temporary file."""
    db = make(
        tmp_path / "c.duckdb",
        [
            "CREATE TABLE t AS SELECT range * 3 AS k FROM range(3000)",
            "CREATE TABLE lg AS SELECT (hash(range) % 9000)::BIGINT AS k FROM range(20000)",
        ],
    )
    target = tmp_path / "out.csv"
    proc = subprocess.Popen(
        [
            sys.executable,
            "-m",
            "advisor",
            "recommend",
            str(db),
            "--table",
            "t",
            "--key",
            "k",
            "--log",
            "lg",
            "--keys-per-page",
            "16",
            "--export",
            str(target),
        ],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
        env={**os.environ, "ADVISOR_PAUSE_AT": phase},
    )
    line = proc.stderr.readline().strip()
    while line.startswith("advisor: ") and "paused at" not in line:  # progress of steps over a second
        line = proc.stderr.readline().strip()
    assert line == f"advisor: paused at {phase}"
    proc.send_signal(signal.SIGINT)
    out, err = proc.communicate(timeout=60)
    assert proc.returncode == 130, (proc.returncode, err)
    assert err.strip().splitlines() == ["advisor: error: interrupted; no output file was left behind"]
    assert not target.exists() and not list(tmp_path.glob(".*partial*"))


def test_large_log_is_aggregated_in_duckdb(tmp_path):
    """A 5M-row log (the 50M case lives in benchmarks/bench_robust.py) becomes O(n) arrays."""
    db = make(
        tmp_path / "l.duckdb",
        [
            "CREATE TABLE t AS SELECT range AS k FROM range(20000)",
            "CREATE TABLE lg AS SELECT (hash(range) % 25000)::BIGINT AS k FROM range(5000000)",
        ],
    )
    with load_workload(db, "t", "k", "lg") as wl:
        assert wl.hist.p.shape == (20000,) and wl.hist.q.shape == (20001,)
        assert wl.hist.total == 5_000_000


def test_memory_limit_option(basic):
    assert plan(basic, "--json", "--memory-limit", "500MB").exit_code == 0
    one_line_error(plan(basic, "--memory-limit", "lots"), 5, "memory limit")


def test_a_table_named_like_a_folder_is_read_as_the_table(tmp_path, monkeypatch):
    """`--log flights` beside a folder flights/ reads the database's table, and says which."""
    db = make(
        tmp_path / "f.duckdb",
        [
            "CREATE TABLE t AS SELECT range::INTEGER AS k FROM range(0, 1000, 3)",
            "CREATE TABLE flights AS SELECT (range % 1100)::INTEGER AS k FROM range(5000)",
        ],
    )
    (tmp_path / "flights").mkdir()
    monkeypatch.chdir(tmp_path)
    run = _json(plan(db, "--json", log="flights"))
    assert run["lookups"] == 5000
    assert "not the path" in json.dumps(run["inputs"])


def test_counts_that_overflow_a_double_are_bad_input(tmp_path):
    db = make(
        tmp_path / "o.duckdb",
        [
            "CREATE TABLE t AS SELECT range::INTEGER AS k FROM range(0, 1000, 3)",
            "CREATE TABLE big AS SELECT * FROM (VALUES (3, 1.5e308::DOUBLE), (6, 1.5e308::DOUBLE)) v(k, n)",
        ],
    )
    one_line_error(plan(db, "--count-column", "n", log="big"), 4, "sums to more")
