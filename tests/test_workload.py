"""The DuckDB histogram against a plain numpy computation of the same counts."""

from __future__ import annotations

import datetime as dt

import duckdb
import numpy as np
import pytest

from advisor.workload import load_workload


def numpy_histogram(keys, looked_up, counts=None):
    """Reference: sorted distinct keys, searchsorted for hits and gaps, NULLs (None) apart."""
    uniq = np.array(sorted(set(k for k in keys if k is not None)), dtype=object)
    n = len(uniq)
    p, q, nulls = np.zeros(n), np.zeros(n + 1), 0.0
    counts = counts if counts is not None else [1] * len(looked_up)
    for v, w in zip(looked_up, counts, strict=False):
        if v is None:
            nulls += w
            continue
        pos = int(np.searchsorted(uniq, v, side="left")) if n else 0
        if pos < n and uniq[pos] == v:
            p[pos] += w
        else:
            q[pos] += w
    return p, q, nulls


def make_db(path, key_sql_type, keys, log, counts=None):
    con = duckdb.connect(str(path))
    con.execute(f"CREATE TABLE t (k {key_sql_type}, payload INTEGER)")
    con.executemany("INSERT INTO t VALUES (?, 1)", [[k] for k in keys])
    if counts is None:
        con.execute(f"CREATE TABLE lg (k {key_sql_type})")
        con.executemany("INSERT INTO lg VALUES (?)", [[v] for v in log])
    else:
        con.execute(f"CREATE TABLE lg (k {key_sql_type}, n BIGINT)")
        con.executemany("INSERT INTO lg VALUES (?, ?)", [[v, c] for v, c in zip(log, counts, strict=False)])
    con.close()


def _check(tmp_path, sql_type, keys, log, counts=None):
    db = tmp_path / "w.duckdb"
    make_db(db, sql_type, keys, log, counts)
    with load_workload(db, "t", "k", "lg", count_column="n" if counts is not None else None, distinct_keys=True) as wl:
        p, q, nulls = numpy_histogram(keys, log, counts)
        np.testing.assert_allclose(wl.hist.p, p)
        np.testing.assert_allclose(wl.hist.q, q)
        assert wl.hist.null_lookups == nulls
        return wl.info


@pytest.mark.parametrize("seed", range(2))
def test_integer_keys_with_misses_at_both_ends(tmp_path, seed):
    rng = np.random.default_rng(seed)
    keys = [int(x) for x in rng.choice(np.arange(100, 1000), 120, replace=False)]
    log = [int(x) for x in rng.integers(0, 1200, 1500)] + [-5, 5000, None, keys[0]]
    _check(tmp_path, "BIGINT", keys, log)


def test_string_keys_sort_by_duckdb_order(tmp_path):
    rng = np.random.default_rng(1)
    alphabet = list("abcXYZ09éü ")
    keys = ["".join(rng.choice(alphabet, int(rng.integers(0, 6)))) for _ in range(200)]
    log = ["".join(rng.choice(alphabet, int(rng.integers(0, 6)))) for _ in range(2000)] + [None]
    # numpy's object sort of str compares code points, as DuckDB's default binary collation does
    # for UTF-8 bytes (UTF-8 preserves code point order)
    _check(tmp_path, "VARCHAR", keys, log)


def test_date_keys_and_counted_log(tmp_path):
    base = dt.date(2024, 1, 1)
    keys = [base + dt.timedelta(days=3 * i) for i in range(50)]
    rng = np.random.default_rng(2)
    log = [base + dt.timedelta(days=int(d)) for d in rng.integers(-10, 170, 400)] + [None]
    counts = [int(c) for c in rng.integers(0, 9, len(log))]
    _check(tmp_path, "DATE", keys, log, counts)


def test_duplicates_and_null_keys_are_counted(tmp_path):
    keys = [1, 1, 2, None, 3, 3, 3]
    info = _check(tmp_path, "INTEGER", keys, [1, 2, 4, None, 0])
    assert info["duplicate_rows"] == 3 and info["null_keys"] == 1


def test_log_files_parquet_and_csv(tmp_path):
    keys = list(range(0, 100, 2))
    log = [int(x) for x in np.random.default_rng(4).integers(-3, 105, 500)]
    db = tmp_path / "w.duckdb"
    make_db(db, "INTEGER", keys, log)
    con = duckdb.connect(str(db), read_only=True)
    con.execute(f"COPY lg TO '{tmp_path / 'log.parquet'}' (FORMAT parquet)")
    con.execute(f"COPY lg TO '{tmp_path / 'log.csv'}' (HEADER)")
    con.close()
    p, q, _ = numpy_histogram(keys, log)
    for name in ("log.parquet", "log.csv"):
        with load_workload(db, "t", "k", str(tmp_path / name)) as wl:
            np.testing.assert_allclose(wl.hist.p, p)
            np.testing.assert_allclose(wl.hist.q, q)


def test_duckdb_spills_into_the_runs_own_directory_and_keeps_the_users_limit(tmp_path):
    """DuckDB's default spill directory sits beside the database file; a run must leave the
    user's directory as it found it, evict its ranked keys while planning, and read them back."""
    db = tmp_path / "own.duckdb"
    make_db(db, "INTEGER", list(range(0, 4000, 2)), [4, 5, 6, 4])
    before = sorted(p.name for p in tmp_path.iterdir())
    with load_workload(db, "t", "k", "lg", memory_limit="300MB") as wl:
        spill = wl.con.execute("SELECT current_setting('temp_directory')").fetchall()[0][0]
        limit = wl.con.execute("SELECT current_setting('memory_limit')").fetchall()[0][0]
        back = wl.con.execute("SELECT count(*), max(k) FROM advisor_ranked_keys").fetchall()[0]
    assert not spill.startswith(str(tmp_path)) and "advisor-duckdb-" in spill
    assert limit == "286.0 MiB"  # the user's 300MB (10^6 bytes each) as DuckDB prints it back, restored
    assert back == (2000, 3998)
    assert sorted(p.name for p in tmp_path.iterdir()) == before
