"""Turn advice into a file of real pages, and measure it: build an index file, replay a log on it.

``build_index`` writes the advised (or the even-split) layout of one plan as a paged index file
(:mod:`advisor.pagefile`). ``probe_index`` replays a lookup log against such a file with one
``os.pread`` per page visited, counts the pages read and compares them with the evaluator's
prediction for the same lookups, computed from the file's own pages.
"""

from __future__ import annotations

import os
import time
from dataclasses import dataclass

import duckdb
import numpy as np

from . import keycodec
from .bufferpool import lookup_paths
from .errors import InputInvalid, SettingInvalid
from .histogram import Histogram
from .layout import Layout, LayoutBuilder, evaluate
from .lru_kernel import lru_miss_count
from .pagefile import CLASSIC, LEAF, PagedIndex, check_page, checked_pages, write_index
from .pagefile_kernel import ABOVE, BELOW, EXACT, find_many, visit_page
from .planner import Plan
from .serialize import _count
from .workload import KEYS_TABLE, Workload, load_workload, quote, table_sql


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
    """Write one plan's advised, even-split or balanced layout as an index file; returns its summary."""
    from .advise import chosen_layout

    size = page_size or plan.page_size
    if not size:
        raise InputInvalid("building a file needs a page size (give --page-size)")
    chosen, predicted = chosen_layout(plan, wl.hist, layout)
    codec, codes, rows = key_codes(wl)
    longest = max((len(c) for c in codes), default=0)
    if longest > 65_535:
        raise SettingInvalid(f"the longest key is {longest:,} bytes; the index file stores keys of up to 65,535 bytes")
    out = write_index(path, chosen, codes, rows, size, codec, wl.key_type, wl.table, wl.key, predicted, replace)
    return {
        "path": str(out),
        "pages": int(chosen.pages),
        "page_size": int(size),
        "layout": layout,
        "model": plan.model,
        "predicted_page_reads": float(predicted),
        "leaf_depths": sorted({int(d) for d in chosen.depths()[chosen.leaf]}) if chosen.leaf is not None else None,
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
    pages = checked_pages(index)  # every page's checksum is checked here, before any search
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


def probe_index(
    path: str | os.PathLike,
    database: str | os.PathLike,
    log: str | None,
    log_column: str | None = None,
    count_column: str | None = None,
    order_column: str | None = None,
    limit: int | None = None,
    pool_pages: int = 0,
    cold: bool = False,
    log_query: str | None = None,
) -> ProbeResult:
    """Replay ``log`` against the index file; counted reads vs the evaluator's prediction.

    Hits and misses are decided exactly as ``recommend`` decides them (the log ranked against the
    table's keys in DuckDB, each value compared in its own type), so a DOUBLE 19.99 on a BIGINT
    key is a miss in the gap below 20 and searches that gap. The file is searched by the
    compiled reader (:mod:`advisor.pagefile_kernel`) over its memory map, once per log row; a
    row's count weighs its page reads (repeats are not replayed one by one)."""
    with PagedIndex(path, pool_pages) as index:
        h = index.header
        layout, codes = read_layout_from_file(index)
        with load_workload(database, h.table, h.key, log, log_column, count_column, True, None, log_query) as wl:
            _, table_codes, truth = key_codes(wl)
            if table_codes != codes:
                raise InputInvalid(
                    f"the keys of {h.table}.{h.key} differ from the file's ({len(table_codes):,} against "
                    f"{len(codes):,}): the table changed since the file was built; rebuild it"
                )
            rank, mode, weight = _ranked_log(wl, order_column, limit)
        if cold:
            os.posix_fadvise(index.fd, 0, 0, os.POSIX_FADV_DONTNEED)
        flat, starts, lengths = _flat_codes(codes)
        rows = np.empty(rank.size, dtype=np.int64)
        reads = np.empty(rank.size, dtype=np.int64)
        stops = np.empty(rank.size, dtype=np.int64)
        buf = index.mapped()
        t0 = time.perf_counter()
        find_many(
            buf,
            h.page_size,
            h.root if h.pages else 0,
            h.fixed_width,
            flat,
            starts,
            lengths,
            np.maximum(rank, 0),
            mode,
            rows,
            reads,
            stops,
        )
        seconds = time.perf_counter() - t0
    hit = mode == EXACT
    n = len(codes)
    found = rows >= 0
    wrong = int((found != hit).sum() + (rows[found] != truth[rank[found]]).sum())
    lookups = float(weight.sum())
    hits = np.bincount(rank[hit], weights=weight[hit], minlength=n)[:n] if n else np.zeros(0)
    gaps = np.bincount(np.where(mode == ABOVE, rank + 1, 0)[~hit], weights=weight[~hit], minlength=n + 1)[: n + 1]
    hist = Histogram(hits.astype(np.float64), gaps.astype(np.float64))
    predicted = evaluate(layout, hist).expected_page_reads if hist.total > 0 else 0.0
    per = lambda x: x / lookups if lookups else 0.0  # noqa: E731
    misses = None
    if pool_pages:  # a row's repeats follow it at once: they find its path in the pool
        paths = lookup_paths(layout)
        misses = per(lru_miss_count(np.maximum(stops - 1, 0)[reads > 0], paths, pool_pages))
    return ProbeResult(
        _count(lookups),
        _count(float(weight[found].sum())),
        _count(float(weight[~found].sum())),
        per(float((reads * weight).sum())),
        predicted,
        1e6 * seconds / rank.size if rank.size else 0.0,
        cold,
        pool_pages,
        misses,
        wrong,
    )


def _ranked_log(wl: Workload, order_column: str | None, limit: int | None):
    """Per log row, in replay order: the rank of the greatest key at or below its value (-1: none),
    its search mode (EXACT for a hit, ABOVE that key or BELOW the first key for a miss) and weight."""
    v = quote(wl.info["log_column"])
    order = wl.log_column(order_column) if order_column else None
    over = f"ORDER BY {order}" if order else ""
    lim = f" LIMIT {int(limit)}" if limit else ""
    try:
        res = wl.con.execute(
            f"WITH lg AS (SELECT * FROM (SELECT {v} AS v, ({wl.weight_sql})::DOUBLE AS w, "
            f"row_number() OVER ({over}) AS i FROM {wl.log_sql} WHERE {v} IS NOT NULL) ORDER BY i{lim}) "
            f"SELECT coalesce(kk.r, -1)::BIGINT AS r, coalesce(lg.v = kk.k, false) AS hit, lg.w AS w "
            f"FROM lg ASOF LEFT JOIN {KEYS_TABLE} kk ON lg.v >= kk.k ORDER BY lg.i"
        ).fetchnumpy()
    except duckdb.Error as e:
        raise InputInvalid(f"cannot replay the log: {str(e).strip().splitlines()[0]}") from None
    rank = np.asarray(res["r"], dtype=np.int64)
    hit = np.asarray(res["hit"], dtype=bool)
    mode = np.where(hit, EXACT, np.where(rank >= 0, ABOVE, BELOW)).astype(np.int8)
    return rank, mode, np.asarray(res["w"], dtype=np.float64)


def _flat_codes(codes: list[bytes]) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The key codes as one byte array with each code's start and length (the kernel's input)."""
    lengths = np.fromiter((len(c) for c in codes), dtype=np.int64, count=len(codes))
    starts = np.concatenate([[0], np.cumsum(lengths)[:-1]]).astype(np.int64) if codes else lengths
    flat = np.frombuffer(b"".join(codes), dtype=np.uint8) if codes else np.zeros(1, dtype=np.uint8)
    if not codes:  # an empty file: one dummy code so that rank 0 exists (the search reads nothing)
        return flat, np.zeros(1, dtype=np.int64), np.zeros(1, dtype=np.int64)
    return flat, starts, lengths


DIRECT_LOOKUPS = 20_000  # --direct replays this many log rows by default: each page read waits for the device


def time_direct(
    paths: list[str | os.PathLike],
    database: str | os.PathLike,
    log: str | None,
    log_column: str | None = None,
    count_column: str | None = None,
    order_column: str | None = None,
    limit: int | None = None,
    blocks: int = 20,
    log_query: str | None = None,
) -> dict:
    """Device time per lookup and per page read of one or more index files of the same keys.

    Every page is read with ``O_DIRECT`` into a page-aligned buffer (an anonymous memory map), so
    each counted read bypasses the operating system's cache and reaches the device (a virtual
    disk may still be cached by its host: the figures are what this machine's device answers).
    The log rows are cut into ``blocks`` blocks and the files take turns block by block (the order
    reversed every other block), so drift in the machine falls on every file alike; the spread
    is over blocks. A row is one lookup here (its count is not a weight: time is per search)."""
    indexes = [PagedIndex(p) for p in paths]
    try:
        first = indexes[0].header
        codes = None
        for ix in indexes:
            h = ix.header
            if (h.table, h.key, h.codec) != (first.table, first.key, first.codec):
                raise InputInvalid(f"{ix.path} indexes {h.table}.{h.key}, not {first.table}.{first.key}")
            _, file_codes = read_layout_from_file(ix)
            if codes is not None and file_codes != codes:
                raise InputInvalid(f"{ix.path} holds other keys than {indexes[0].path}")
            codes = file_codes
        with load_workload(
            database, first.table, first.key, log, log_column, count_column, True, None, log_query
        ) as wl:
            rank, mode, _ = _ranked_log(wl, order_column, limit or DIRECT_LOOKUPS)
        fds = [_open_direct(ix.path) for ix in indexes]
        try:
            return _timed_blocks(indexes, fds, codes, rank, mode, max(1, min(blocks, rank.size or 1)))
        finally:
            for fd in fds:
                os.close(fd)
    finally:
        for ix in indexes:
            ix.close()


def _open_direct(path) -> int:
    try:
        return os.open(path, os.O_RDONLY | os.O_DIRECT)
    except (OSError, AttributeError) as e:
        reason = getattr(e, "strerror", None) or "not supported here"
        raise SettingInvalid(f"{path}: this filesystem refuses direct reads (O_DIRECT: {reason})") from None


def _timed_blocks(indexes, fds, codes, rank, mode, blocks: int) -> dict:
    import mmap

    flat, kstarts, klens = _flat_codes(codes)
    which = np.maximum(rank, 0)
    cuts = np.linspace(0, rank.size, blocks + 1).astype(np.int64)
    size = max(ix.header.page_size for ix in indexes)
    buf = mmap.mmap(-1, size)  # page-aligned, as O_DIRECT needs
    view = np.frombuffer(buf, dtype=np.uint8)
    starts = np.empty(size, dtype=np.int64)
    lengths = np.empty(size, dtype=np.int64)
    visit_page(np.zeros(size, dtype=np.uint8), 0, flat, 0, 0, EXACT, starts, lengths)  # compile/load outside the clock
    per_block = np.zeros((len(indexes), blocks))
    reads = np.zeros(len(indexes), dtype=np.int64)
    found = np.zeros(len(indexes), dtype=np.int64)
    for b in range(blocks):
        order = range(len(indexes)) if b % 2 == 0 else range(len(indexes) - 1, -1, -1)
        for f in order:
            h, fd = indexes[f].header, fds[f]
            ps = h.page_size
            page_view = view[:ps]
            t0 = time.perf_counter()
            for j in range(cuts[b], cuts[b + 1]):
                page, row, w, m = h.root if h.pages else 0, -1, which[j], mode[j]
                while page:
                    try:
                        os.preadv(fd, [memoryview(buf)[:ps]], page * ps)
                    except OSError as e:
                        raise SettingInvalid(f"{indexes[f].path}: a direct read failed ({e.strerror})") from None
                    reads[f] += 1
                    check_page(buf[:ps], page, indexes[f].path)  # as an engine checks a page read from disk
                    page, row = visit_page(page_view, h.fixed_width, flat, kstarts[w], klens[w], m, starts, lengths)
                found[f] += row >= 0
            per_block[f, b] = (time.perf_counter() - t0) / max(1, cuts[b + 1] - cuts[b])
    n = int(rank.size)
    files = []
    for f, ix in enumerate(indexes):
        us = 1e6 * per_block[f]
        mean = float(us.mean()) if n else 0.0
        pages = reads[f] / n if n else 0.0
        files.append(
            {
                "path": str(ix.path),
                "page_size": ix.header.page_size,
                "model": ix.header.structure,
                "lookups": n,
                "found": int(found[f]),
                "page_reads_per_lookup": float(pages),
                "microseconds_per_lookup": mean,
                "microseconds_per_lookup_median": float(np.median(us)) if n else 0.0,
                "microseconds_per_lookup_spread": [float(us.min()), float(us.max())] if n else [0.0, 0.0],
                "microseconds_per_page_read": float(mean / pages) if pages else 0.0,
            }
        )
    return {"direct": True, "blocks": blocks, "files": files}


__all__ = ["ProbeResult", "build_index", "probe_index", "read_layout_from_file", "time_direct"]
