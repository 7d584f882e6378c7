"""The commands' Parquet row-group paths (``--model parquet``): plan, build, probe."""

from __future__ import annotations

import json
from pathlib import Path

from rich.console import Console

from .cli_support import read_query, warn
from .errors import OutputRefused, SettingInvalid
from .progress import steps
from .workload import load_workload


def parse_columns(text: str | None) -> tuple[str, ...] | None:
    if text is None:
        return None
    names = tuple(c.strip() for c in text.split(",") if c.strip())
    if not names:
        raise SettingInvalid("--columns needs at least one column name")
    return names


def _public(run: dict) -> dict:
    return {k: v for k, v in run.items() if not k.startswith("_")}


def recommend_parquet(
    database, table, key, log, log_sql, log_column, count_column, memory_limit, opts, as_json, export, force
):
    from .export import check_destination, check_target
    from .rowgroups.export import write_groups_table
    from .rowgroups.plan import plan_parquet
    from .rowgroups.report import render_plan

    if export is not None:
        check_destination(export)
        check_target(export, force)
    query = read_query(log_sql)
    with steps() as progress:
        progress.step("reading the table and aggregating the log in DuckDB")
        with load_workload(database, table, key, log, log_column, count_column, True, memory_limit, query) as wl:
            full = plan_parquet(wl, opts, progress.step)
            if export is not None:
                progress.step("writing the export")
                full["exports"] = [write_groups_table(wl, *full["_advised_groups"], export, force)]
            run = _public(full)
    warn(run.get("warnings", []))
    if as_json:
        print(json.dumps(run, indent=2, default=str))
    else:
        Console(highlight=False).print(render_plan(run))


def build_parquet_cmd(
    database,
    table,
    key,
    log,
    log_sql,
    log_column,
    count_column,
    memory_limit,
    opts,
    out: Path,
    layout: str,
    force: bool,
    as_json: bool,
) -> None:
    from .rowgroups.build import build_parquet

    if layout not in ("advised", "even"):
        raise SettingInvalid(f"--layout must be advised or even for --model parquet, got {layout!r}")
    if out.exists() and not force:
        raise OutputRefused(f"{out} exists; pass --force to replace it")
    if not out.parent.exists():
        raise OutputRefused(f"directory {out.parent} does not exist")
    query = read_query(log_sql)
    with steps() as progress:
        progress.step("reading the table and aggregating the log in DuckDB")
        with load_workload(database, table, key, log, log_column, count_column, True, memory_limit, query) as wl:
            summary = build_parquet(wl, opts, out, layout, progress.step)
    if as_json:
        print(json.dumps(summary, indent=2, default=str))
        return
    log_arg = f"--log {log}" if log else f"--log-sql {log_sql}"
    Console(highlight=False).print(
        f"Wrote {summary['path']}: {summary['rows']:,} rows in {summary['row_groups']:,} row groups "
        f"({summary['layout']} layout, {summary['bytes'] / 2**20:,.1f} MiB); predicted from its metadata "
        f"{summary['predicted_bytes_per_lookup'] / 1024:,.1f} KiB per lookup of the log. Measure it with: "
        f"advisor probe {summary['path']} {database} {log_arg}",
        soft_wrap=True,
    )


def probe_parquet_cmd(index_file: Path, database, log, log_column, count_column, table, key, limit, seed, as_json):
    from .rowgroups.plan import read_table
    from .rowgroups.probe import probe_parquet
    from .rowgroups.report import render_probe
    from .rowgroups.writer import read_groups

    if not index_file.exists():
        from .errors import InputNotFound

        raise InputNotFound(f"Parquet file not found: {index_file}")
    meta = read_groups(index_file).meta
    table = table or meta.get("table")
    key = key or meta.get("key")
    if not table or not key:
        raise SettingInvalid(
            f"{index_file} was not written by advisor build: name the table and key it holds (--table, --key)"
        )
    with steps() as progress:
        progress.step("reading the table and aggregating the log in DuckDB")
        with load_workload(database, table, key, log, log_column, count_column, True) as wl:
            rows = read_table(wl).rows_per_key
            progress.step("replaying sampled lookups through DuckDB")
            res = probe_parquet(wl, index_file, rows, limit, seed)
    if as_json:
        print(json.dumps(res, indent=2, default=str))
    else:
        Console(highlight=False).print(render_probe(res, str(index_file)))
    return res
