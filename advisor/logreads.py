"""What a run reads from the log beyond the histogram: the ordered replay, the range scans, the
earlier/later split for the held-out check, and separator widths for suffix truncation. Each is
one DuckDB query against the workload's resolved log and ranked keys."""

from __future__ import annotations

import numpy as np

from .geometry import LENGTH_PREFIX
from .histogram import Histogram
from .workload import KEYS_TABLE, Workload, aggregate, quote


def load_split(wl: Workload, order_column: str, holdout: float) -> tuple[Histogram, Histogram]:
    """Histograms of the earlier (1 - holdout) and the later ``holdout`` share of the log's rows,
    by ``order_column`` (ties broken by DuckDB's sort)."""
    lsql, o = wl.log_sql, wl.log_column(order_column)
    v, w = quote(wl.info["log_column"]), wl.weight_sql
    ranked = f"SELECT {v} AS v, {w} AS w, percent_rank() OVER (ORDER BY {o}) AS pr FROM {lsql}"
    out = []
    for cond in (f"pr < {1 - holdout}", f"pr >= {1 - holdout}"):
        probes = f"SELECT v, sum(w)::DOUBLE AS w FROM ({ranked}) WHERE {cond} GROUP BY v"
        p, q = aggregate(wl.con, probes, wl.hist.n)
        out.append(Histogram(p, q))
    return out[0], out[1]


def load_replay(wl: Workload, order_column: str, limit: int = 20_000_000):
    """The log's non-NULL lookups in ``order_column`` order (the first ``limit`` rows), as outcome ids."""
    from .bufferpool import Replay

    lsql, o = wl.log_sql, wl.log_column(order_column)
    v = quote(wl.info["log_column"])
    w = f"({wl.weight_sql})::DOUBLE"
    n = wl.hist.n
    rows = wl.con.execute(
        f"WITH lg AS (SELECT {v} AS v, {o} AS o, {w} AS w FROM {lsql} WHERE {v} IS NOT NULL "
        f"ORDER BY {o} LIMIT {int(limit)}) "
        f"SELECT CASE WHEN lg.v = kk.k THEN kk.r ELSE {n} + coalesce(kk.r, -1) + 1 END AS id, lg.w "
        f"FROM lg ASOF LEFT JOIN {KEYS_TABLE} kk ON lg.v >= kk.k ORDER BY lg.o"
    ).fetchnumpy()
    # outcome ids run to 2n: int32 while that fits (half the memory of the replayed log)
    ids = np.asarray(rows.pop("id"), dtype=np.int32 if 2 * n + 1 < 2**31 else np.int64)
    reps = whole_repeats(np.asarray(rows.pop("w"), dtype=np.float64))
    if reps.size and reps.min() == 1 and reps.max() == 1:  # one lookup per row: nothing to repeat
        return Replay(ids[: int(limit)], n)
    return Replay(np.repeat(ids, reps)[: int(limit)], n)


def whole_repeats(weights: np.ndarray) -> np.ndarray:
    """How many times to replay each row: its count, rounded so that the running total of the
    repeats stays within one half of the running total of the counts (fractional counts from a
    sampled log; whole counts come out unchanged)."""
    running = np.floor(np.cumsum(weights) + 0.5).astype(np.int64)
    return np.diff(running, prepend=0)


def load_scans(wl: Workload, scan_to: str) -> tuple[np.ndarray, np.ndarray, np.ndarray, Histogram]:
    """Range scans (first rank, last rank, weight) from log rows whose ``scan_to`` is not NULL,
    and the histogram of the point lookups alone (rows where it is NULL)."""
    lsql, hi = wl.log_sql, wl.log_column(scan_to)
    v, w = quote(wl.info["log_column"]), wl.weight_sql
    scans = (
        f"SELECT {v} AS lo, {hi} AS hi, sum({w})::DOUBLE AS w FROM {lsql} "
        f"WHERE {v} IS NOT NULL AND {hi} IS NOT NULL GROUP BY ALL"
    )
    rows = wl.con.execute(
        f"WITH s AS ({scans}), "
        f"a AS (SELECT s.*, CASE WHEN kk.k = s.lo THEN kk.r ELSE coalesce(kk.r, -1) + 1 END AS first "
        f"      FROM s ASOF LEFT JOIN {KEYS_TABLE} kk ON s.lo >= kk.k) "
        f"SELECT a.first, coalesce(k2.r, -1) AS last, sum(a.w) AS w "
        f"FROM a ASOF LEFT JOIN {KEYS_TABLE} k2 ON a.hi >= k2.k GROUP BY ALL"
    ).fetchnumpy()
    points = f"SELECT {v} AS v, sum({w})::DOUBLE AS w FROM {lsql} WHERE {hi} IS NULL GROUP BY {v}"
    p, q = aggregate(wl.con, points, wl.hist.n)
    first = np.asarray(rows["first"], dtype=np.int64)
    last = np.asarray(rows["last"], dtype=np.int64)
    return first, last, np.asarray(rows["w"], dtype=np.float64), Histogram(p, q)


def truncated_separator_bytes(wl: Workload, leaf_capacity: int) -> float:
    """Mean width of suffix-truncated separators between the even split's leaves.

    The separator before leaf t only has to sort above the last key of leaf t-1, so the
    shortest prefix of leaf t's first key that differs from that key (common prefix + 1 byte)
    suffices (suffix truncation, common practice for string keys); plus the 2-byte length prefix.
    """
    L = int(leaf_capacity)
    rows = (
        wl.con.execute(
            f"SELECT a.k::BLOB, b.k::BLOB FROM {KEYS_TABLE} a JOIN {KEYS_TABLE} b ON b.r = a.r + 1 WHERE b.r % {L} = 0"
        ).fetchall()
        if wl.key_type.upper().startswith(("VARCHAR", "BLOB"))
        else []
    )
    if not rows:
        return wl.key_bytes
    widths = []
    for left, right in rows:
        lcp = 0
        for x, y in zip(left, right, strict=False):
            if x != y:
                break
            lcp += 1
        widths.append(min(len(right), lcp + 1))
    return float(np.mean(widths)) + LENGTH_PREFIX


def ranked_keys(wl: Workload) -> np.ndarray:
    """The table's distinct keys in rank order (for comparing with an existing index's keys)."""
    return wl.con.execute(f"SELECT k FROM {KEYS_TABLE} ORDER BY r").fetchnumpy()["k"]
