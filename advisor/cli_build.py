"""The build and probe commands: write a plan as a paged index file, and measure one."""

from __future__ import annotations

import json
import shlex
from pathlib import Path
from typing import Annotated

import typer
from rich.console import Console

from .advise import PageSettings, Request
from .budget import BudgetSpec
from .cli_options import (
    GEO,
    IN,
    OUT,
    WL,
    ChildOpt,
    ColumnsOpt,
    CountColumnOpt,
    DatabaseArg,
    DistinctOpt,
    ExactOpt,
    FanoutOpt,
    FillOpt,
    FooterCachedOpt,
    ForceOpt,
    HeaderOpt,
    InternalFillOpt,
    JsonOpt,
    KeyBytesOpt,
    KeyOpt,
    LogColumnOpt,
    LogOpt,
    LogSqlOpt,
    MaxHeightOpt,
    MaxPagesOpt,
    MaxRowGroupsOpt,
    MemoryOpt,
    MinGroupRowsOpt,
    RecordOpt,
    RowGroupRowsOpt,
    SmoothOpt,
    TableOpt,
    option,
)
from .cli_rowgroups import build_parquet_cmd, parse_columns, probe_parquet_cmd
from .cli_support import check_model, guard, need_log, read_query
from .errors import LayoutInvalid, OutputRefused, SettingInvalid, UsageError
from .report import render_direct, render_probe
from .rowgroups.plan import EVEN_ROWS, MIN_ROWS, RowGroupOptions
from .structures import structure_for, structure_names
from .workload import load_workload


def build_cmd(
    database: DatabaseArg,
    table: TableOpt,
    key: KeyOpt,
    out: Annotated[
        Path, option("--out", "The index file to write (refused if it exists, unless --force).", OUT, metavar="FILE")
    ],
    log: LogOpt = None,
    log_sql: LogSqlOpt = None,
    log_column: LogColumnOpt = None,
    count_column: CountColumnOpt = None,
    page_size: Annotated[
        int | None, option("--page-size", "Page size in bytes of the file (default 4096).", GEO, metavar="BYTES")
    ] = None,
    keys_per_page: Annotated[
        int | None,
        option(
            "--keys-per-page",
            "Capacity c instead of the geometry formula (the file still needs --page-size).",
            GEO,
            metavar="C",
        ),
    ] = None,
    page_header: HeaderOpt = PageSettings.page_header,
    record_pointer: RecordOpt = PageSettings.record_pointer,
    child_pointer: ChildOpt = PageSettings.child_pointer,
    key_bytes: KeyBytesOpt = None,
    model: Annotated[
        str,
        option(
            "--model",
            "Index structure: btree, bplus, or parquet (a key-sorted Parquet file; --out FILE.parquet).",
            GEO,
            metavar="btree|bplus|parquet",
        ),
    ] = "btree",
    fanout: FanoutOpt = None,
    fill_factor: FillOpt = 1.0,
    internal_fill: InternalFillOpt = None,
    layout: Annotated[
        str,
        option(
            "--layout",
            "Which layout to write: advised, even (the even split, to compare) or balanced (B+: every leaf "
            "at one depth, leaves cut for the pool).",
            OUT,
            metavar="advised|even|balanced",
        ),
    ] = "advised",
    max_pages: MaxPagesOpt = "even",
    max_height: MaxHeightOpt = "even",
    smoothing: SmoothOpt = 0.0,
    exact_seconds: ExactOpt = 5.0,
    distinct_keys: DistinctOpt = False,
    memory_limit: MemoryOpt = None,
    force: ForceOpt = False,
    as_json: JsonOpt = False,
    columns: ColumnsOpt = None,
    footer_cached: FooterCachedOpt = False,
    row_group_rows: RowGroupRowsOpt = EVEN_ROWS,
    max_row_groups: MaxRowGroupsOpt = "even",
    min_group_rows: MinGroupRowsOpt = MIN_ROWS,
) -> None:
    """Write the advised (or even-split) layout as a file of fixed-size pages, or as a key-sorted
    Parquet file with the advised row groups (--model parquet), that you can probe."""
    with guard():
        from .advise import plan_one
        from .build import build_index

        need_log(log, log_sql)
        if model == "parquet":
            opts = RowGroupOptions(
                parse_columns(columns), footer_cached, row_group_rows, max_row_groups, min_group_rows, False
            )
            build_parquet_cmd(
                database,
                table,
                key,
                log,
                log_sql,
                log_column,
                count_column,
                memory_limit,
                opts,
                out,
                layout,
                force,
                as_json,
            )
            return

        if layout not in ("advised", "even", "balanced"):
            raise SettingInvalid(f"--layout must be advised, even or balanced, got {layout!r}")
        if layout == "balanced" and not structure_for(model).has_balanced_shape:
            raise SettingInvalid("--layout balanced is a B+ tree: give --model bplus")
        check_model(model, [keys_per_page] if keys_per_page else None, fanout)
        if len(structure_names(model)) != 1:
            raise SettingInvalid("a build writes one structure: --model btree or bplus")
        if out.exists() and not force:
            raise OutputRefused(f"{out} exists; pass --force to replace it")
        size = page_size or 4096
        settings = PageSettings(
            [] if keys_per_page else [size],
            [keys_per_page] if keys_per_page else [],
            page_header,
            record_pointer,
            child_pointer,
            key_bytes,
            model,
            fill_factor,
            internal_fill,
        )
        request = Request(
            settings,
            smoothing,
            fanout,
            exact_seconds=exact_seconds,
            budget=BudgetSpec(max_pages, max_height),
            frontier=False,
        )
        query = read_query(log_sql)
        with load_workload(
            database, table, key, log, log_column, count_column, distinct_keys, memory_limit, query
        ) as wl:
            plan = plan_one(wl, request)
            summary = build_index(wl, plan, out, layout, force, size)
        if as_json:
            print(json.dumps(summary, indent=2))
        else:
            Console(highlight=False).print(
                f"Wrote {summary['path']}: {summary['pages']:,} pages of {summary['page_size']:,} bytes "
                f"({summary['layout']} {summary['model']} layout), predicted "
                f"{summary['predicted_page_reads']:.3f} page reads per lookup. "
                f"Measure it with: advisor probe {shlex.quote(summary['path'])} {shlex.quote(str(database))} "
                + (f"--log {shlex.quote(log)}" if log else f"--log-sql {shlex.quote(str(log_sql))}")
            )


def probe_cmd(
    targets: Annotated[
        list[Path],
        typer.Argument(
            help="An index file written by advisor build (several with --direct), or a key-sorted .parquet file; "
            "then the DuckDB database (opened read-only).",
            metavar="FILE... DATABASE",
        ),
    ],
    log: Annotated[
        str | None,
        option(
            "--log", "Lookup log to replay: a table in the database, or a .parquet/.csv file.", IN, metavar="TABLE|FILE"
        ),
    ] = None,
    log_sql: LogSqlOpt = None,
    log_column: LogColumnOpt = None,
    count_column: CountColumnOpt = None,
    order_column: Annotated[
        str | None,
        option("--order-column", "Replay the log in this column's order (default: as stored).", IN, metavar="COLUMN"),
    ] = None,
    limit: Annotated[
        int | None, option("--limit", "Replay at most this many log rows.", IN, min=1, metavar="N")
    ] = None,
    pool_pages: Annotated[
        int,
        option(
            "--pool-pages",
            "An LRU pool of this many pages in front of the file (0: every page visit is a read).",
            WL,
            min=0,
            metavar="PAGES",
        ),
    ] = 0,
    cold: Annotated[
        bool, option("--cold", "Drop the file from the operating system's page cache before the replay.", WL)
    ] = False,
    as_json: JsonOpt = False,
    table: Annotated[
        str | None,
        option("--table", "Parquet: the table the file holds (default: from its metadata).", IN, metavar="NAME"),
    ] = None,
    key: Annotated[
        str | None, option("--key", "Parquet: the key column (default: from its metadata).", IN, metavar="COLUMN")
    ] = None,
    seed: Annotated[int, option("--seed", "Parquet: seed of the lookup sample.", IN, metavar="N")] = 1,
    direct: Annotated[
        bool,
        option(
            "--direct",
            "Time every page read on the device (O_DIRECT), files taking turns block by block (default --limit 20000).",
            WL,
        ),
    ] = False,
) -> None:
    """Replay a log against an index file (page reads counted against the model's prediction), or
    sampled lookups through DuckDB against a Parquet file (bytes counted by DuckDB's profiler)."""
    with guard():
        from .build import probe_index, time_direct

        need_log(log, log_sql)
        if len(targets) < 2:
            raise UsageError("give an index file and the database: advisor probe FILE DATABASE --log LOG")
        *files, database = targets
        if direct:
            if any(f.suffix.lower() == ".parquet" for f in files) or pool_pages or cold:
                raise SettingInvalid(
                    "--direct times index files written by advisor build, without --pool-pages or --cold"
                )
            res = time_direct(
                files, database, log, log_column, count_column, order_column, limit, log_query=read_query(log_sql)
            )
            if as_json:
                print(json.dumps(res, indent=2))
            else:
                Console(highlight=False).print(render_direct(res))
            return
        if len(files) > 1:
            raise UsageError("several files are timed side by side with --direct; without it, probe one file")
        (index_file,) = files
        if index_file.suffix.lower() == ".parquet":
            if log_sql is not None:
                raise SettingInvalid("probing a Parquet file takes --log, not --log-sql, yet")
            res = probe_parquet_cmd(
                index_file, database, log, log_column, count_column, table, key, limit or 20_000, seed, as_json
            )
            if res["wrong_rows"]:
                raise LayoutInvalid(f"{res['wrong_rows']} rows found in the file differ from the table")
            return

        res = probe_index(
            index_file,
            database,
            log,
            log_column,
            count_column,
            order_column,
            limit,
            pool_pages,
            cold,
            read_query(log_sql),
        )
        if as_json:
            print(json.dumps(res.as_dict(), indent=2))
        else:
            Console(highlight=False).print(render_probe(res.as_dict(), str(index_file)))
        if res.wrong_rows:
            raise LayoutInvalid(f"{res.wrong_rows} found keys returned a row number that is not their table row")


def verify_cmd(
    index_file: Annotated[Path, typer.Argument(help="An index file written by advisor build.", metavar="FILE")],
    as_json: JsonOpt = False,
) -> None:
    """Check every page's checksum and the tree's invariants (order, links, leaf chain, key count);
    the first problem is one line naming the page, exit 8."""
    with guard():
        from .verify import verify_file

        res = verify_file(index_file)
        if as_json:
            print(json.dumps(res | {"ok": True}, indent=2))
        else:
            print(
                f"{res['path']}: sound: {res['pages']:,} pages, {res['keys']:,} keys, {res['height']} levels "
                f"({'B+' if res['structure'] == 'bplus' else 'classic'} tree); every checksum and invariant holds"
            )
