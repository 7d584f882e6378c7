"""Turn advice into a file of real pages, and measure it: build an index file, replay a log on it.

``build_index`` writes the advised (or the even-split) layout of one plan as a paged index file
(:mod:`advisor.pagefile`). ``probe_index`` replays a lookup log against such a file with one
``os.pread`` per page visited, counts the pages read and compares them with the evaluator's
prediction for the same lookups, computed from the file's own pages.
"""

from __future__ import annotations

import bisect
import os
import time
from dataclasses import dataclass

import duckdb
import numpy as np

from . import keycodec
from .errors import InputInvalid
from .histogram import Histogram
from .layout import Layout, LayoutBuilder, evaluate
from .pagefile import CLASSIC, LEAF, PagedIndex, parse_page, write_index
from .planner import Plan
from .workload import KEYS_TABLE, Workload, find_column, log_source, open_database, quote, table_sql

REPLAY_BATCH = 100_000


def key_codes(wl: Workload) -> tuple[str, list[bytes], np.ndarray]:
    """(codec, code per key rank, row number per key rank) for the workload's ranked keys."""
    codec = keycodec.codec_for(wl.key_type)
    tsql = table_sql(wl.con, wl.table)
    k = quote(wl.key)
    res = wl.con.execute(
        f"SELECT {keycodec.sql_value(wl.key_type, 'kk.k')} AS v, min(t.rowid)::BIGINT AS row "
        f"FROM {KEYS_TABLE} kk JOIN {tsql} t ON t.{k} = kk.k GROUP BY kk.r, kk.k ORDER BY kk.r"
    ).fetchnumpy()
    values = res["v"]
    codes = [keycodec.encode(codec, v) for v in values.tolist()]
    return codec, codes, np.asarray(res["row"], dtype=np.int64)


def build_index(
    wl: Workload,
    plan: Plan,
    path: str | os.PathLike,
    layout: str = "advised",
    replace: bool = False,
    page_size: int | None = None,
) -> dict:
    """Write one plan's advised or even-split layout as an index file; returns its summary."""
    chosen: Layout = plan.recommended if layout == "advised" else plan.uniform
    size = page_size or plan.page_size
    if not size:
        raise InputInvalid("building a file needs a page size (give --page-size)")
    predicted = (plan.recommended_cost if layout == "advised" else plan.uniform_cost).expected_page_reads
    codec, codes, rows = key_codes(wl)
    out = write_index(path, chosen, codes, rows, size, codec, wl.key_type, wl.table, wl.key, predicted, replace)
    return {
        "path": str(out),
        "pages": int(chosen.pages),
        "page_size": int(size),
        "layout": layout,
        "model": plan.model,
        "predicted_page_reads": float(predicted),
    }


@dataclass(frozen=True)
class ProbeResult:
    lookups: int
    found: int
    not_found: int
    page_reads_per_lookup: float
    predicted_page_reads_per_lookup: float
    microseconds_per_lookup: float
    cold: bool
    pool_pages: int
    pool_misses_per_lookup: float | None
    wrong_rows: int  # found keys whose row number differs from the table's (must be 0)

    def as_dict(self) -> dict:
        return dict(self.__dict__)


def read_layout_from_file(index: PagedIndex) -> tuple[Layout, list[bytes]]:
    """The tree the file holds, as a :class:`Layout` over key ranks, and the sorted key codes
    (read without counting page reads)."""
    h = index.header
    pages = [parse_page(os.pread(index.fd, h.page_size, (p + 1) * h.page_size), h.fixed_width) for p in range(h.pages)]
    leafy = [pg.kind in (CLASSIC, LEAF) for pg in pages]
    codes = sorted({c for pg, keep in zip(pages, leafy, strict=True) if keep for c in pg.keys})
    rank = {c: i for i, c in enumerate(codes)}
    b = LayoutBuilder(len(codes), 1, h.structure, 2)
    parent = {0: (-1, -1)}
    for p, pg in enumerate(pages):
        for s, child in enumerate(pg.children):
            if child:
                parent[child - 1] = (p, s)
    cap, fan = 1, 2
    for p, pg in enumerate(pages):
        par, sl = parent[p]
        if h.structure == "bplus" and pg.kind != LEAF:
            # separators: the first key of each child but the first
            ranks = [rank[c] for c in pg.keys]
            fan = max(fan, len(pg.children))
        else:
            ranks = [rank[c] for c in pg.keys]
            cap = max(cap, len(ranks))
        b.add(np.asarray(ranks, dtype=np.int64), par, sl, leaf=pg.kind != 2)
    b.capacity, b.fanout = cap, fan
    return b.build(), codes


def _replay_values(con, log_sql: str, value_sql: str, weight_sql: str, order: str | None, limit: int | None):
    o = f" ORDER BY {order}" if order else ""
    lim = f" LIMIT {int(limit)}" if limit else ""
    res = con.execute(
        f"SELECT {value_sql} AS v, {weight_sql} AS w FROM {log_sql} WHERE {value_sql} IS NOT NULL{o}{lim}"
    )
    while True:
        batch = res.fetchmany(REPLAY_BATCH)
        if not batch:
            break
        yield batch


def probe_index(
    path: str | os.PathLike,
    database: str | os.PathLike,
    log: str,
    log_column: str | None = None,
    count_column: str | None = None,
    order_column: str | None = None,
    limit: int | None = None,
    pool_pages: int = 0,
    cold: bool = False,
) -> ProbeResult:
    """Replay ``log`` against the index file; counted reads vs the evaluator's prediction."""
    with PagedIndex(path, pool_pages) as index:
        h = index.header
        layout, codes = read_layout_from_file(index)
        if cold:
            os.posix_fadvise(index.fd, 0, 0, os.POSIX_FADV_DONTNEED)
        con = open_database(database)
        try:
            lsql, lname = log_source(con, log)
            cols = {r[0]: r[1] for r in con.execute(f"DESCRIBE SELECT * FROM {lsql}").fetchall()}
            vcol = find_column(cols, log_column or h.key, f"log {lname}")
            value_sql = keycodec.sql_value(h.key_type, f"CAST({quote(vcol)} AS {h.key_type})")
            weight = f"{quote(find_column(cols, count_column, f'log {lname}'))}::BIGINT" if count_column else "1"
            order = quote(find_column(cols, order_column, f"log {lname}")) if order_column else None
            truth = _true_rows(con, h)
            lookups = found = wrong = 0
            hits = np.zeros(len(codes))
            gaps = np.zeros(len(codes) + 1)
            seconds = 0.0  # only the index searches are timed, not reading the log
            for batch in _replay_values(con, lsql, value_sql, weight, order, limit):
                coded = [(keycodec.encode(h.codec, value), max(0, int(w))) for value, w in batch]
                t0 = time.perf_counter()
                for code, w in coded:
                    for _ in range(w):
                        row = index.find(code)
                        lookups += 1
                        if row is not None:
                            found += 1
                            wrong += truth.get(code) != row
                seconds += time.perf_counter() - t0
                for code, w in coded:  # the same lookups as a histogram, for the prediction
                    i = bisect.bisect_left(codes, code)
                    if i < len(codes) and codes[i] == code:
                        hits[i] += w
                    else:
                        gaps[i] += w
        except duckdb.Error as e:
            raise InputInvalid(f"cannot replay the log: {str(e).strip().splitlines()[0]}") from None
        finally:
            con.close()
        hist = Histogram(hits, gaps)
        predicted = evaluate(layout, hist).expected_page_reads if hist.total > 0 else 0.0
        per = lambda x: x / lookups if lookups else 0.0  # noqa: E731
        return ProbeResult(
            lookups,
            found,
            lookups - found,
            per(index.pages_read),
            predicted,
            1e6 * per(seconds),
            cold,
            pool_pages,
            per(index.pool_misses) if pool_pages else None,
            int(wrong),
        )


def _true_rows(con, h) -> dict[bytes, int]:
    """Each key's row number straight from the table (the check that found keys are right)."""
    tsql = table_sql(con, h.table)
    k = quote(h.key)
    res = con.execute(
        f"SELECT {keycodec.sql_value(h.key_type, k)} AS v, min(rowid)::BIGINT AS row FROM {tsql} "
        f"WHERE {k} IS NOT NULL GROUP BY {k}"
    ).fetchall()
    return {keycodec.encode(h.codec, v): int(r) for v, r in res}


__all__ = ["ProbeResult", "build_index", "probe_index", "read_layout_from_file"]
