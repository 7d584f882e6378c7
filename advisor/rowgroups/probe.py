"""``advisor probe FILE.parquet``: replay a sample of the log as point queries through DuckDB on
the file, count the bytes DuckDB reads with its own profiler, and compare with the prediction
from the file's own metadata (the footer read plus the chunks of every group whose [min, max]
holds the value). Every found row is checked against the table.

The sample: ``limit`` lookups drawn with replacement from the log, in proportion to their counts,
by a seeded systematic draw in SQL; each distinct value is queried once and weighted by how often
it was drawn (a value's bytes do not depend on when it is asked)."""

from __future__ import annotations

import json
import os
import tempfile
import time
from pathlib import Path

import numpy as np

from ..errors import InputInvalid, InputNotFound
from ..workload import KEYS_TABLE, Workload, quote, table_sql
from .writer import read_groups

VALUES = "advisor_probe_values"


def _sample(wl: Workload, limit: int, seed: int) -> None:
    """A TEMP table (v, n, r, hit) of sampled non-NULL values, draws per value, and where each
    lands among the ranked keys (the same ASOF rule as the histogram)."""
    v = quote(wl.info["log_column"])
    w = wl.weight_sql
    u = np.random.default_rng(seed).random() if limit else 0.0
    wl.con.execute(
        f"CREATE OR REPLACE TEMP TABLE {VALUES} AS "
        f"WITH agg AS (SELECT {v} AS v, sum({w})::DOUBLE AS w FROM {wl.log_sql} WHERE {v} IS NOT NULL GROUP BY {v}), "
        f"c AS (SELECT v, w, sum(w) OVER (ORDER BY v ROWS UNBOUNDED PRECEDING) AS hi FROM agg WHERE w > 0), "
        f"tot AS (SELECT max(hi) AS t FROM c), "
        f"draws AS (SELECT (i + {u}) * (SELECT t FROM tot) / {int(limit)} AS x FROM range({int(limit)}) r(i)), "
        f"picked AS (SELECT c.v AS v, count(*) AS n FROM draws ASOF JOIN c ON draws.x < c.hi GROUP BY c.v) "
        f"SELECT p.v, p.n, coalesce(kk.r, -1) AS r, coalesce(p.v = kk.k, false) AS hit "
        f"FROM picked p ASOF LEFT JOIN {KEYS_TABLE} kk ON p.v >= kk.k"
    )


def _profiled(con, sql: str, params: list, prof: str) -> tuple[int, float, float, float]:
    t0 = time.perf_counter()
    rows = con.execute(sql, params).fetchall()
    took = time.perf_counter() - t0
    with open(prof) as fh:
        io = json.load(fh).get("io", {})
    return len(rows), float(io.get("total_bytes_read", 0)), float(io.get("total_read_operations", 0)), took


def probe_parquet(wl: Workload, path: Path, rows_per_key: np.ndarray, limit: int, seed: int) -> dict:
    """Counted against predicted bytes per lookup on ``limit`` sampled lookups (see the module)."""
    if not Path(path).exists():
        raise InputNotFound(f"Parquet file not found: {path}")
    groups = read_groups(path)
    key = groups.meta.get("key", wl.key)
    if key not in groups.columns:
        raise InputInvalid(f"{path} has no column {key!r}")
    columns = groups.meta.get("columns_read") or list(groups.columns)
    missing = [c for c in columns if c not in groups.columns]
    if missing:
        raise InputInvalid(f"{path} lacks the columns {missing} its metadata names")
    _sample(wl, limit, seed)
    picked = wl.con.execute(f"SELECT v, n, r, hit FROM {VALUES}").fetchall()
    # prediction per value from the file's own groups (rows per key place every key's rows)
    S = np.zeros(rows_per_key.shape[0] + 1)
    np.cumsum(rows_per_key, out=S[1:])
    b = groups.bounds
    per_group = groups.read_bytes(columns)
    cols = ", ".join(quote(c) for c in columns)
    src = f"read_parquet('{str(path).replace(chr(39), chr(39) * 2)}')"
    sql = f"SELECT {cols} FROM {src} WHERE {quote(key)} = $1"
    con = wl.con
    prof = os.path.join(tempfile.mkdtemp(prefix="advisor-probe-"), "profile.json")
    con.execute("PRAGMA enable_profiling = 'json'")
    con.execute(f"SET profiling_output = '{prof}'")
    con.execute("SET enable_object_cache = false")
    totals = dict(n=0.0, found=0.0, bytes=0.0, ops=0.0, secs=0.0, pred=0.0, groups=0.0)
    try:
        for value, n, r, hit in picked:
            found, read, ops, took = _profiled(con, sql, [value], prof)
            gs = _groups_read(S, b, int(r), bool(hit), rows_per_key.shape[0])
            totals["n"] += n
            totals["found"] += n * (found > 0)
            totals["bytes"] += n * read
            totals["ops"] += n * ops
            totals["secs"] += n * took
            totals["groups"] += n * len(gs)
            totals["pred"] += n * (groups.footer_bytes + float(per_group[gs].sum()))
    finally:
        con.execute("PRAGMA disable_profiling")
    wrong = _wrong_rows(wl, src, key, columns)
    N = max(totals["n"], 1.0)
    counted, predicted = totals["bytes"] / N, totals["pred"] / N
    return {
        "path": str(path),
        "layout": groups.meta.get("layout", "unknown (not written by advisor build)"),
        "row_groups": int(groups.rows.shape[0]),
        "lookups": int(totals["n"]),
        "distinct_values_queried": len(picked),
        "found": int(totals["found"]),
        "not_found": int(totals["n"] - totals["found"]),
        "bytes_per_lookup": counted,
        "predicted_bytes_per_lookup": predicted,
        "counted_over_predicted": counted / predicted if predicted else None,
        "row_groups_per_lookup": totals["groups"] / N,
        "read_operations_per_lookup": totals["ops"] / N,
        "microseconds_per_lookup": 1e6 * totals["secs"] / N,
        "columns_read": list(columns),
        "wrong_rows": int(wrong),
        "counted_by": "DuckDB profiler io.total_bytes_read per query",
    }


def _groups_read(S: np.ndarray, bounds: np.ndarray, r: int, hit: bool, n: int) -> np.ndarray:
    """Groups whose [min, max] holds a value that hits key r, or misses in the gap after key r."""

    def first(i):
        return int(np.searchsorted(bounds, S[i], side="right") - 1)

    def last(i):
        return int(np.searchsorted(bounds, S[i + 1] - 1, side="right") - 1)

    if hit:
        return np.arange(first(r), last(r) + 1)
    if r < 0 or r >= n - 1:
        return np.zeros(0, dtype=np.int64)  # before the first key or after the last
    a, b = last(r), first(r + 1)
    return np.array([a]) if a == b else np.zeros(0, dtype=np.int64)


def _wrong_rows(wl: Workload, src: str, key: str, columns) -> int:
    """Rows of the sampled hit values that differ between the file and the table (either way)."""
    tsql = table_sql(wl.con, wl.table)
    cols = ", ".join(quote(c) for c in columns)
    k = quote(key)
    a = f"SELECT {cols} FROM {src} WHERE {k} IN (SELECT v FROM {VALUES} WHERE hit)"
    b = f"SELECT {cols} FROM {tsql} WHERE {k} IN (SELECT v FROM {VALUES} WHERE hit)"
    q = f"SELECT (SELECT count(*) FROM ({a} EXCEPT ALL {b})) + (SELECT count(*) FROM ({b} EXCEPT ALL {a}))"
    return int(wl.con.execute(q).fetchall()[0][0])
