"""Read a table's keys and a lookup log through DuckDB into a :class:`Histogram`.

All counting happens in SQL: distinct keys are ranked once with ``row_number() OVER (ORDER BY
key)`` (DuckDB's own ordering), the log is grouped by looked-up value, and an ASOF LEFT JOIN
finds each value's predecessor key: equal means a hit on that key, otherwise a miss in the gap
after it (no predecessor: the gap before the first key). Only O(n) aggregated arrays reach
Python. The user's database is opened read-only; the ranked keys live in a TEMP table so that
exports can turn ranks back into key values of the key's own type.
"""

from __future__ import annotations

import atexit
import math
import os
import shutil
import tempfile
from dataclasses import dataclass, field
from pathlib import Path

import duckdb
import numpy as np

from .errors import AdvisorError, InputBusy, InputInvalid, InputNotFound, SettingInvalid
from .geometry import LENGTH_PREFIX, fixed_key_bytes
from .histogram import Histogram

KEYS_TABLE = "advisor_ranked_keys"
EVICT_TO_BYTES = 32 * 2**20  # DuckDB's memory while the planner runs (see release_memory)
LOG_FILE_SUFFIXES = (".parquet", ".csv", ".tsv", ".csv.gz", ".parquet.gz")


def quote(name: str) -> str:
    """Quote an SQL identifier (parameters bind values only)."""
    return '"' + name.replace('"', '""') + '"'


def sql_string(text: str) -> str:
    return "'" + text.replace("'", "''") + "'"


def run_sql(con: duckdb.DuckDBPyConnection, sql: str, params: list | None = None) -> list:
    """Execute and drain a statement (an undrained result blocks the connection)."""
    return con.execute(sql, params or []).fetchall()


def open_database(path: str | os.PathLike) -> duckdb.DuckDBPyConnection:
    """Open a DuckDB file read-only, turning DuckDB's errors into one-line library errors."""
    path = Path(path)
    if not path.exists():
        raise InputNotFound(f"database file not found: {path}")
    if path.is_dir():
        raise InputInvalid(f"database path is a directory, not a DuckDB file: {path}")
    try:
        con = duckdb.connect(str(path), read_only=True)
    except duckdb.Error as e:
        text = str(e)
        if "lock" in text.lower():
            raise InputBusy(f"database {path} is locked by another process; try again when it is free") from None
        if "not a valid DuckDB database" in text or "Unrecognized" in text or "Serialization" in text:
            raise InputInvalid(f"not a DuckDB database file: {path}") from None
        raise InputInvalid(f"cannot open database {path}: {_first_line(text)}") from None
    run_sql(con, "SET enable_progress_bar = false")
    # DuckDB spills (large aggregations, the evicted ranked keys) to a directory beside the
    # database by default: the run's own temporary directory instead, so nothing appears beside
    # the user's file; removed when the process ends
    spill = tempfile.mkdtemp(prefix="advisor-duckdb-")
    atexit.register(shutil.rmtree, spill, ignore_errors=True)
    run_sql(con, f"SET temp_directory = {sql_string(spill)}")
    return con


def release_memory(con: duckdb.DuckDBPyConnection) -> None:
    """Hand DuckDB's working memory back to the operating system before planning.

    After a large aggregation DuckDB's allocator keeps its peak (about 130 MB at a million keys
    with a 10M-row log) until the memory limit changes, and the ranked keys table stays in memory
    (about 21 bytes per key) although only exports read it, after planning. Lowering the limit
    far below what is in use and restoring it flushes the one and moves the other to the run's
    temporary directory (:func:`open_database`), from where DuckDB reads it back when needed:
    at 10M keys the process then holds about 210 MB less while it plans."""
    try:
        limit = con.execute("SELECT current_setting('memory_limit')").fetchall()[0][0]
    except duckdb.Error:
        return
    try:
        run_sql(con, f"SET memory_limit = '{EVICT_TO_BYTES}B'")
    except duckdb.Error:
        pass  # only a saving (say, no room to spill): the run goes on with the memory DuckDB holds
    finally:
        run_sql(con, f"SET memory_limit = {sql_string(limit)}")


def _first_line(text: str) -> str:
    return text.strip().splitlines()[0] if text.strip() else text


@dataclass
class Workload:
    """An open read-only database, its ranked keys, and the histogram of the log."""

    con: duckdb.DuckDBPyConnection
    hist: Histogram
    key_type: str
    key_bytes: float
    table: str
    key: str
    log: str
    info: dict = field(default_factory=dict)
    log_sql: str = ""  # the log as an SQL relation, resolved once
    log_columns: dict = field(default_factory=dict)  # its column names and types
    weight_sql: str = "1"  # lookups per log row: 1, or the checked count column
    key_lengths: np.ndarray | None = None  # variable-length keys: stored widths, longest first

    def log_column(self, name: str) -> str:
        """Quoted name of a log column (exact, then case-insensitive match), or InputNotFound."""
        return quote(find_column(self.log_columns, name, f"log {self.log}"))

    def close(self) -> None:
        self.con.close()

    def __enter__(self) -> Workload:
        return self

    def __exit__(self, *exc) -> None:
        self.close()


def _columns(con, relation_sql: str, what: str) -> dict[str, str]:
    try:
        rows = con.execute(f"DESCRIBE SELECT * FROM {relation_sql}").fetchall()
    except duckdb.Error as e:
        raise InputInvalid(f"cannot read {what}: {_first_line(str(e))}") from None
    return {r[0]: str(r[1]) for r in rows}


def find_column(columns: dict[str, str], name: str, what: str) -> str:
    """Exact column name match first, then case-insensitive (DuckDB's own rule)."""
    if name in columns:
        return name
    lower = {c.lower(): c for c in columns}
    if name.lower() in lower:
        return lower[name.lower()]
    raise InputNotFound(f"column {name!r} not found in {what} (columns: {', '.join(columns) or 'none'})")


def table_sql(con, table: str) -> str:
    found = con.execute(
        "SELECT table_schema, table_name FROM information_schema.tables "
        "WHERE lower(table_name) = lower(?) ORDER BY table_name = ? DESC LIMIT 1",
        [table, table],
    ).fetchall()
    if not found:
        raise InputNotFound(f"table {table!r} not found in the database")
    schema, name = found[0]
    return f"{quote(schema)}.{quote(name)}"


class QueryLog(str):
    """A log given as a query (``--log-sql``): the SQL relation itself, already checked."""


def query_log(con, text: str) -> QueryLog:
    """Check a query whose result is the lookup log and return it as a relation. The database is
    open read-only, so the query can read files and tables but write nothing."""
    body = text.strip().rstrip(";").strip()
    lines = [ln for ln in body.splitlines() if not ln.strip().startswith("--")]
    if not "\n".join(lines).strip():
        raise InputInvalid("the --log-sql file holds no query")
    rel = f"({body}\n)"
    try:
        con.execute(f"SELECT * FROM {rel} LIMIT 0").fetchall()
    except duckdb.Error as e:
        raise InputInvalid(f"the --log-sql query does not run: {_first_line(str(e))}") from None
    return QueryLog(rel)


def _table_named(con, name: str) -> str | None:
    """SQL for the table (or view) called ``name`` exactly as typed, or None."""
    if os.sep in name or name.lower().endswith(LOG_FILE_SUFFIXES) or any(ch in name for ch in "*?["):
        return None
    try:
        return table_sql(con, name)
    except InputNotFound:
        return None


def log_source(con, log: str) -> tuple[str, str]:
    """SQL relation for the log and a human name: a query, a file (or a directory or glob of
    Parquet files, hive partitions read as columns) DuckDB reads, or a table."""
    if isinstance(log, QueryLog):
        return str(log), "query (--log-sql)"
    named = _table_named(con, log)
    if named is not None:
        if os.path.exists(log):  # a table and a path of one name: the database's table wins, said so
            return named, f"table {log} (the database's table, not the path {log})"
        return named, f"table {log}"
    if any(ch in log for ch in "*?[") and log.lower().endswith(".parquet"):
        rel = f"read_parquet({sql_string(log)}, hive_partitioning = true)"
        try:
            con.execute(f"SELECT * FROM {rel} LIMIT 0").fetchall()
        except duckdb.Error as e:
            raise InputNotFound(f"no Parquet files match {log}: {_first_line(str(e))}") from None
        return rel, f"files {log}"
    if os.path.isdir(log):
        pattern = os.path.join(log, "**", "*.parquet")
        rel = f"read_parquet({sql_string(pattern)}, hive_partitioning = true)"
        try:
            con.execute(f"SELECT * FROM {rel} LIMIT 0").fetchall()
        except duckdb.Error as e:
            raise InputInvalid(f"log directory {log} holds no readable Parquet files: {_first_line(str(e))}") from None
        return rel, f"directory {log}"
    looks_like_file = log.lower().endswith(LOG_FILE_SUFFIXES) or os.sep in log or os.path.exists(log)
    if not looks_like_file:
        return table_sql(con, log), f"table {log}"
    path = Path(log)
    if not path.exists():
        raise InputNotFound(f"log file not found: {log}")
    lower = log.lower()
    if lower.endswith((".parquet", ".parquet.gz")):
        rel = f"read_parquet({sql_string(str(path))})"
    elif lower.endswith((".csv", ".tsv", ".csv.gz")):
        rel = f"read_csv({sql_string(str(path))})"
    else:
        raise InputInvalid(f"log file {log} is neither .parquet nor .csv")
    try:
        con.execute(f"SELECT * FROM {rel} LIMIT 0").fetchall()
    except duckdb.Error as e:
        raise InputInvalid(
            f"log file {log} is not readable as {'Parquet' if 'parquet' in rel else 'CSV'}: {_first_line(str(e))}"
        ) from None
    return rel, f"file {log}"


def load_workload(
    database: str | os.PathLike,
    table: str,
    key: str,
    log: str | None,
    log_column: str | None = None,
    count_column: str | None = None,
    distinct_keys: bool = False,
    memory_limit: str | None = None,
    log_query: str | None = None,
) -> Workload:
    """Open ``database`` read-only and build the histogram of ``log`` against ``table.key``.

    ``log`` is a table in the same database or a path to a Parquet/CSV file; ``None`` means no
    log (every weight zero). ``log_column`` defaults to ``key``; ``count_column`` makes each
    log row stand for that many lookups. A key column with repeated values is refused unless
    ``distinct_keys``: then the index is planned over the distinct values (one entry per value,
    as a unique index or a value-to-row-list index stores them). NULL keys are never indexed;
    they are counted in ``info``.
    """
    con = open_database(database)
    if memory_limit:
        try:
            run_sql(con, f"SET memory_limit = {sql_string(memory_limit)}")
        except duckdb.Error:
            con.close()
            raise SettingInvalid(f"memory limit {memory_limit!r} is not a size DuckDB understands (e.g. 2GB)") from None
    try:
        if log_query is not None:
            if log is not None:
                raise SettingInvalid("give the log as --log or as --log-sql, not both")
            log = query_log(con, log_query)
        workload = _load(con, table, key, log, log_column, count_column, distinct_keys)
        release_memory(con)
        return workload
    except (AdvisorError, KeyboardInterrupt):
        con.close()
        raise
    except duckdb.InterruptException:
        con.close()
        raise KeyboardInterrupt from None
    except duckdb.Error as e:
        con.close()
        raise InputInvalid(_first_line(str(e))) from None


def _load(con, table, key, log, log_column, count_column, distinct_keys) -> Workload:
    tsql = table_sql(con, table)
    tcols = _columns(con, tsql, f"table {table}")
    kcol = find_column(tcols, key, f"table {table}")
    ktype = tcols[kcol]
    if ktype.upper().endswith("]") or ktype.upper().startswith(("STRUCT", "MAP", "UNION")):
        raise InputInvalid(f"key column {kcol!r} has type {ktype}, which has no single sort order for an index")
    k = quote(kcol)
    # dense_rank over the column ranks distinct values without a DISTINCT pass first (4x faster at
    # 10M keys); only a column that repeats values, with --distinct-keys, is ranked again distinct
    run_sql(
        con,
        f"CREATE OR REPLACE TEMP TABLE {KEYS_TABLE} AS "
        f"SELECT {k} AS k, (dense_rank() OVER (ORDER BY {k}) - 1)::BIGINT AS r FROM {tsql} WHERE {k} IS NOT NULL",
    )
    rows, null_keys = con.execute(f"SELECT count(*), count(*) FILTER (WHERE {k} IS NULL) FROM {tsql}").fetchall()[0]
    n = con.execute(f"SELECT coalesce(max(r) + 1, 0) FROM {KEYS_TABLE}").fetchall()[0][0]
    if rows - null_keys > n and distinct_keys:
        run_sql(con, f"CREATE OR REPLACE TEMP TABLE {KEYS_TABLE} AS SELECT DISTINCT k, r FROM {KEYS_TABLE}")
    key_bytes = fixed_key_bytes(ktype)
    key_lengths = None
    if key_bytes is None:
        width = "octet_length(k)" if ktype.upper().startswith(("BLOB", "BIT")) else "strlen(k::VARCHAR)"
        got = con.execute(f"SELECT {width}::BIGINT AS w FROM {KEYS_TABLE} ORDER BY w DESC").fetchnumpy()["w"]
        key_lengths = np.asarray(got, dtype=np.int64) + LENGTH_PREFIX
        key_bytes = float(key_lengths.mean()) if key_lengths.size else float(LENGTH_PREFIX)
    info = {
        "table_rows": int(rows),
        "null_keys": int(null_keys),
        "duplicate_rows": int(rows - null_keys - n),
    }
    if info["duplicate_rows"] and not distinct_keys:
        raise InputInvalid(
            f"key column {kcol!r} repeats values ({info['duplicate_rows']} rows share a key with another row); "
            "pass --distinct-keys to plan one index entry per distinct value"
        )
    if log is None:
        hist = Histogram(np.zeros(n), np.zeros(n + 1), 0.0)
        return Workload(con, hist, ktype, key_bytes, table, kcol, "", info, key_lengths=key_lengths)
    lsql, lname = log_source(con, log)
    lcols = _columns(con, lsql, f"log {lname}")
    vcol = find_column(lcols, log_column or kcol, f"log {lname}")
    weight = "1"
    if count_column:
        ccol = find_column(lcols, count_column, f"log {lname}")
        weight, fractional = _checked_count(con, lsql, ccol, lcols[ccol], lname)
        if fractional:  # a sampled log scaled by its rate: the counts are weights, not whole lookups
            info["fractional_count_rows"] = fractional
    v = quote(vcol)
    info |= {"log_column": vcol, "log_type": lcols[vcol], "count_column": count_column}
    probes = f"SELECT {v} AS v, sum({weight})::DOUBLE AS w FROM {lsql} GROUP BY {v}"
    try:
        p, q = aggregate(con, probes, n)
        nulls = con.execute(f"SELECT coalesce(sum({weight})::DOUBLE, 0) FROM {lsql} WHERE {v} IS NULL").fetchall()[0][0]
    except (duckdb.BinderException, duckdb.ConversionException) as e:
        raise InputInvalid(
            f"log column {vcol!r} ({lcols[vcol]}) cannot be compared with key column {kcol!r} ({ktype}): "
            f"{_first_line(str(e))}"
        ) from None
    hist = Histogram(p.astype(np.float64), q.astype(np.float64), float(nulls))
    return Workload(con, hist, ktype, key_bytes, table, kcol, lname, info, lsql, lcols, weight, key_lengths)


def aggregate(con, probes_sql: str, n: int) -> tuple[np.ndarray, np.ndarray]:
    """Hit and gap weights from a (v, w) probes query (one row per value): ASOF join to the ranked
    keys; the misses of one gap are summed by ``np.bincount``, not by a second GROUP BY."""
    agg = con.execute(
        f"WITH probes AS ({probes_sql}) "
        f"SELECT coalesce(kk.r, -1) AS r, coalesce(p.v = kk.k, false) AS hit, p.w AS w "
        f"FROM probes p ASOF LEFT JOIN {KEYS_TABLE} kk ON p.v >= kk.k "
        f"WHERE p.v IS NOT NULL"
    ).fetchnumpy()
    r = np.asarray(agg["r"], dtype=np.int64)
    hit = np.asarray(agg["hit"], dtype=bool)
    w = np.asarray(agg["w"], dtype=np.float64)
    p = np.bincount(r[hit], weights=w[hit], minlength=n)[:n] if n else np.zeros(0)
    q = np.bincount(r[~hit] + 1, weights=w[~hit], minlength=n + 1)[: n + 1]
    return p.astype(np.float64), q.astype(np.float64)


def _checked_count(con, lsql: str, col: str, ctype: str, lname: str) -> str:
    """SQL for the count column after rejecting NULL, NaN, negative or infinite counts, and how many
    rows hold a fractional count (accepted as a weight: a sampled log scaled by its rate)."""
    c = quote(col)
    t = ctype.upper()
    if not (
        t
        in (
            "TINYINT",
            "SMALLINT",
            "INTEGER",
            "BIGINT",
            "HUGEINT",
            "UTINYINT",
            "USMALLINT",
            "UINTEGER",
            "UBIGINT",
            "FLOAT",
            "DOUBLE",
        )
        or t.startswith("DECIMAL")
    ):
        raise InputInvalid(f"count column {col!r} in {lname} has type {ctype}; a number is needed")
    floaty = t in ("FLOAT", "DOUBLE")
    nan = f"count(*) FILTER (WHERE isnan({c}))" if floaty else "0"
    frac = f"count(*) FILTER (WHERE {c} <> floor({c}))" if (floaty or t.startswith("DECIMAL")) else "0"
    nulls, neg, nans, fracs = con.execute(
        f"SELECT count(*) FILTER (WHERE {c} IS NULL), count(*) FILTER (WHERE {c} < 0), {nan}, {frac} FROM {lsql}"
    ).fetchall()[0]
    for bad, what in ((nulls, "NULL"), (nans, "NaN"), (neg, "negative")):
        if bad:
            raise InputInvalid(f"count column {col!r} in {lname} has {bad} {what} value(s)")
    if floaty:
        inf = con.execute(f"SELECT count(*) FILTER (WHERE isinf({c})) FROM {lsql}").fetchall()[0][0]
        if inf:
            raise InputInvalid(f"count column {col!r} in {lname} has {inf} infinite value(s)")
    total = con.execute(f"SELECT sum({c}::DOUBLE) FROM {lsql}").fetchall()[0][0]
    if total is not None and not math.isfinite(total):
        raise InputInvalid(f"count column {col!r} in {lname} sums to more than a double holds")
    return f"{c}::DOUBLE", int(fracs)
