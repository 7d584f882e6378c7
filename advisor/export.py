"""Write a layout's pages with their separator keys, atomically, and read one back.

One row per page: ``page_id``, ``depth`` (root = 1), ``parent_page_id`` (null for the root),
``child_position`` (0..c, the slot in the parent), ``key_count``, ``first_key``, ``last_key``
and ``keys`` (the page's keys in key order, a list of the key column's own type). The format
follows the extension: .csv, .json (one array), .parquet, or .duckdb (a new file holding the
table ``page_layout``). DuckDB writes a temporary file beside the target, which is renamed
over it only when complete; an existing target is refused unless ``replace`` is set.
"""

from __future__ import annotations

import os
from pathlib import Path

import duckdb
import numpy as np

from .atomic import atomic_path
from .errors import InputInvalid, OutputRefused
from .layout import Layout, LayoutBuilder, check_layout
from .workload import KEYS_TABLE, Workload, quote, run_sql, sql_string

FORMATS = {".csv": "csv", ".json": "json", ".parquet": "parquet", ".duckdb": "duckdb", ".db": "duckdb"}
EXPORT_TABLE = "page_layout"


def export_format(path: str | os.PathLike) -> str:
    suffix = Path(path).suffix.lower()
    if suffix not in FORMATS:
        raise OutputRefused(f"export path {path} must end in one of {', '.join(FORMATS)}")
    return FORMATS[suffix]


def check_destination(path: str | os.PathLike) -> None:
    """Refuse a bad format or a missing directory before any work is done."""
    path = Path(path)
    export_format(path)
    if path.is_dir():
        raise OutputRefused(f"export path {path} is a directory")
    if not path.parent.exists():
        raise OutputRefused(f"export directory {path.parent} does not exist")


def check_target(path: str | os.PathLike, replace: bool) -> None:
    """Refuse before writing anything if the target exists and is not to be replaced."""
    path = Path(path)
    check_destination(path)
    if path.exists() and not replace:
        raise OutputRefused(f"export file {path} exists; pass --force to replace it")


def _stage(wl: Workload, layout: Layout) -> str:
    """Register the page arrays and return SQL for the export rows."""
    depth = layout.depths()
    sizes = layout.page_sizes()
    pages = {
        "page_id": np.arange(layout.pages, dtype=np.int64),
        "depth": depth.astype(np.int64),
        "parent_page_id": layout.parent.astype(np.int64),
        "child_position": layout.slot.astype(np.int64),
        "key_count": sizes.astype(np.int64),
        "is_leaf": layout.leaf.astype(bool) if layout.leaf is not None else np.ones(layout.pages, dtype=bool),
    }
    members = {
        "page_id": np.repeat(np.arange(layout.pages, dtype=np.int64), sizes),
        "r": layout.page_keys.astype(np.int64),
    }
    wl.con.register("advisor_export_pages", pages)
    wl.con.register("advisor_export_members", members)
    return (
        "WITH grouped AS (SELECT m.page_id, list(k.k ORDER BY m.r) AS keys "
        f"FROM advisor_export_members m JOIN {KEYS_TABLE} k ON k.r = m.r GROUP BY m.page_id) "
        "SELECT p.page_id, p.depth, "
        "CASE WHEN p.parent_page_id < 0 THEN NULL ELSE p.parent_page_id END AS parent_page_id, "
        "CASE WHEN p.child_position < 0 THEN NULL ELSE p.child_position END AS child_position, p.key_count, "
        f"{'p.is_leaf, ' if layout.structure == 'bplus' else ''}"
        "g.keys[1] AS first_key, g.keys[-1] AS last_key, g.keys "
        "FROM advisor_export_pages p JOIN grouped g USING (page_id) ORDER BY p.page_id"
    )


def write_layout(wl: Workload, layout: Layout, path: str | os.PathLike, replace: bool = False) -> Path:
    """Write ``layout`` to ``path`` atomically; returns the final path."""
    path = Path(path)
    check_target(path, replace)
    fmt = export_format(path)
    select = _stage(wl, layout)
    if fmt == "csv":  # CSV has no list type: the keys column holds a JSON array (documented)
        select = f"SELECT * REPLACE (to_json(keys)::VARCHAR AS keys) FROM ({select})"
    try:
        with atomic_path(path) as tmp:
            if fmt == "duckdb":
                alias = "advisor_export_target"
                run_sql(wl.con, f"ATTACH {sql_string(str(tmp))} AS {alias} (READ_WRITE)")
                try:
                    run_sql(wl.con, f"CREATE TABLE {alias}.{EXPORT_TABLE} AS {select}")
                finally:
                    run_sql(wl.con, f"DETACH {alias}")
            else:
                opts = {
                    "csv": "FORMAT csv, HEADER true",
                    "json": "FORMAT json, ARRAY true",
                    "parquet": "FORMAT parquet",
                }[fmt]
                run_sql(wl.con, f"COPY ({select}) TO {sql_string(str(tmp))} ({opts})")
    except duckdb.InterruptException:
        raise KeyboardInterrupt from None
    except duckdb.Error as e:
        raise OutputRefused(f"cannot write export {path}: {str(e).splitlines()[0]}") from None
    return path


def read_layout(wl: Workload, path: str | os.PathLike, capacity: int, fanout: int = 0) -> Layout:
    """Read an export back into a :class:`Layout` over ``wl``'s keys (for checks and re-costing).

    ``fanout`` > 0 reads a B+-tree export (its ``is_leaf`` column says which pages are leaves)."""
    path = Path(path)
    fmt = export_format(path)
    ktype = wl.key_type
    if fmt == "csv":
        leafcol = "is_leaf::BOOLEAN AS is_leaf, " if fanout else ""
        rel = (
            f"(SELECT page_id::BIGINT AS page_id, parent_page_id::BIGINT AS parent_page_id, "
            f"child_position::BIGINT AS child_position, {leafcol}keys::JSON::{ktype}[] AS keys "
            f"FROM read_csv({sql_string(str(path))}, all_varchar=true))"
        )
    elif fmt == "json":
        leafcol = "is_leaf, " if fanout else ""
        source = f"read_json({sql_string(str(path))})"
        rel = f"(SELECT page_id, parent_page_id, child_position, {leafcol}keys::{ktype}[] AS keys FROM {source})"
    elif fmt == "parquet":
        rel = f"read_parquet({sql_string(str(path))})"
    else:
        run_sql(wl.con, f"ATTACH {sql_string(str(path))} AS advisor_import (READ_ONLY)")
        rel = f"advisor_import.{EXPORT_TABLE}"
    try:
        leaf_sql = "is_leaf" if fanout else "true"
        meta = wl.con.execute(
            f"SELECT page_id, coalesce(parent_page_id, -1), coalesce(child_position, -1), {leaf_sql} "
            f"FROM {rel} ORDER BY page_id"
        ).fetchall()
        members = wl.con.execute(
            f"SELECT e.page_id, kk.r FROM (SELECT page_id, unnest(keys) AS k FROM {rel}) e "
            f"LEFT JOIN {KEYS_TABLE} kk ON kk.k = e.k ORDER BY e.page_id, kk.r"
        ).fetchall()
    except duckdb.Error as e:
        raise InputInvalid(f"cannot read layout {path}: {str(e).splitlines()[0]}") from None
    finally:
        if fmt == "duckdb":
            run_sql(wl.con, "DETACH advisor_import")
    if any(r is None for _, r in members):
        raise InputInvalid(f"layout {path} names keys that are not in table {quote(wl.table)}")
    by_page: dict[int, list[int]] = {}
    for page, r in members:
        by_page.setdefault(page, []).append(r)
    b = LayoutBuilder(wl.hist.n, capacity, "bplus" if fanout else "btree", fanout)
    for page, parent, slot, is_leaf in meta:
        if page != len(b):
            raise InputInvalid(f"layout {path}: page ids must run 0, 1, 2, ...")
        b.add(np.asarray(by_page.get(page, []), dtype=np.int64), int(parent), int(slot), bool(is_leaf))
    layout = b.build()
    check_layout(layout)
    return layout
