"""``advisor build --model parquet``: plan, write the even or advised file, and predict what a
lookup of the planned log reads on it from the written file's own metadata."""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path

import numpy as np

from ..workload import Workload
from .plan import (
    RowGroupOptions,
    Traffic,
    chosen_columns,
    cut_bounds,
    even_bounds,
    group_reads,
    plan_parquet,
    read_table,
)
from .writer import read_groups, write_groups


def file_prediction(hist, rows_per_key: np.ndarray, groups, columns) -> dict:
    """Bytes, row groups per lookup on the whole histogram, from the file's metadata."""
    S = np.zeros(hist.n + 1)
    np.cumsum(rows_per_key, out=S[1:])
    W = hist.total
    b = groups.bounds
    if W <= 0:
        return {"bytes": groups.footer_bytes, "groups": 0.0}
    return {
        "bytes": groups.footer_bytes + group_reads(Traffic(hist), S, b, groups.read_bytes(columns)) / W,
        "groups": group_reads(Traffic(hist), S, b, np.ones(groups.rows.shape[0])) / W,
    }


def build_parquet(wl: Workload, opts: RowGroupOptions, out: Path, layout: str, on_step=None) -> dict:
    step = on_step or (lambda text: None)
    run = plan_parquet(wl, replace(opts, frontier=False, order_column=None), step)
    table = read_table(wl)
    columns = chosen_columns(table, wl.key, opts.columns)
    plan = run["plans"][0]
    if layout == "advised":
        from .partition import instance

        inst = instance(wl.hist.p, wl.hist.q, table.rows_per_key, table.null_rows, 0, 0, 0)
        ranks = _ranks_of_first_keys(run)
        bounds = cut_bounds(inst, ranks)
        modelled = plan["optimized"]["expected_bytes"]
    else:
        bounds = even_bounds(table.rows, opts.row_group_rows)
        modelled = plan["uniform"]["expected_bytes"]
    meta = {
        "model": "parquet",
        "layout": layout,
        "table": wl.table,
        "key": wl.key,
        "columns_read": list(columns),
        "budget": plan["budget"],
        "even_group_rows": opts.row_group_rows,
        "footer_cached": opts.footer_cached,
        "modelled_bytes_per_lookup": modelled,
        "advice": "test on a copy of your data before production use",
    }
    step(f"writing {len(bounds) - 1:,} row groups")
    meta["encodings"] = {k: v for k, v in run["_writer"].items() if k == "use_dictionary"}
    write_groups(wl, bounds, out, meta, run["_writer"])
    groups = read_groups(out)
    pred = file_prediction(wl.hist, table.rows_per_key, groups, columns)
    footer = 0.0 if opts.footer_cached else groups.footer_bytes
    return {
        "path": str(out),
        "model": "parquet",
        "layout": layout,
        "row_groups": int(groups.rows.shape[0]),
        "rows": int(groups.rows.sum()),
        "bytes": int(groups.file_bytes),
        "columns_read": list(columns),
        "predicted_bytes_per_lookup": pred["bytes"] - (groups.footer_bytes - footer),
        "predicted_row_groups_per_lookup": pred["groups"],
        "modelled_bytes_per_lookup": modelled,
        "budget": plan["budget"],
    }


def _ranks_of_first_keys(run: dict) -> np.ndarray:
    return np.asarray(run["_advised_starts"], dtype=np.int64)
