"""Write the advised row groups as a small table a writer or a partitioning scheme can take: one
row per group with ``row_group``, ``first_key`` and ``last_key`` (the key's own type), ``rows``
and ``lookup_share`` (the share of the log's lookups that read the group). The format follows
the extension (.csv, .json, .parquet, .duckdb), written atomically like every export."""

from __future__ import annotations

import os
from pathlib import Path

import duckdb
import numpy as np

from ..atomic import atomic_path
from ..errors import OutputRefused
from ..export import check_target, export_format
from ..workload import KEYS_TABLE, Workload, run_sql, sql_string

EXPORT_TABLE = "row_groups"


def write_groups_table(wl: Workload, starts: np.ndarray, rows: np.ndarray, share: np.ndarray, path, replace=False):
    path = Path(path)
    check_target(path, replace)
    fmt = export_format(path)
    n = wl.hist.n
    ends = np.append(starts[1:], n) - 1
    wl.con.register(
        "advisor_export_groups",
        {
            "row_group": np.arange(starts.shape[0], dtype=np.int64),
            "first_r": starts.astype(np.int64),
            "last_r": ends.astype(np.int64),
            "rows": np.asarray(rows, dtype=np.int64),
            "lookup_share": np.asarray(share, dtype=np.float64),
        },
    )
    select = (
        "SELECT g.row_group, a.k AS first_key, b.k AS last_key, g.rows, g.lookup_share "
        f"FROM advisor_export_groups g JOIN {KEYS_TABLE} a ON a.r = g.first_r "
        f"JOIN {KEYS_TABLE} b ON b.r = g.last_r ORDER BY g.row_group"
    )
    try:
        with atomic_path(path) as tmp:
            if fmt == "duckdb":
                run_sql(wl.con, f"ATTACH {sql_string(str(tmp))} AS advisor_export_target (READ_WRITE)")
                try:
                    run_sql(wl.con, f"CREATE TABLE advisor_export_target.{EXPORT_TABLE} AS {select}")
                finally:
                    run_sql(wl.con, "DETACH advisor_export_target")
            else:
                opts = {
                    "csv": "FORMAT csv, HEADER true",
                    "json": "FORMAT json, ARRAY true",
                    "parquet": "FORMAT parquet",
                }
                run_sql(wl.con, f"COPY ({select}) TO {sql_string(str(tmp))} ({opts[fmt]})")
    except duckdb.InterruptException:
        raise KeyboardInterrupt from None
    except duckdb.Error as e:
        raise OutputRefused(f"cannot write export {path}: {str(e).splitlines()[0]}") from None
    finally:
        wl.con.unregister("advisor_export_groups")
    return os.fspath(path)
