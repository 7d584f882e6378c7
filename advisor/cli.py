"""Command line: parse, call the library, render, and turn library errors into exit codes.

Exit codes: 0 success; 2 usage error (Typer); 3 input not found; 4 input unusable; 5 setting
impossible; 6 database locked; 7 output refused or failed; 8 invalid layout; 1 unexpected
internal error; 130 interrupted.
"""

from __future__ import annotations

import json
import time
from pathlib import Path
from typing import Annotated, Optional

import typer
from rich.console import Console

from . import interrupt
from .advise import PageSettings, Request, analyse, chosen_layout, export_paths
from .budget import BudgetSpec
from .cli_build import build_cmd, probe_cmd, verify_cmd
from .cli_options import (
    ChildOpt,
    ColumnsOpt,
    CountColumnOpt,
    CurrentOpt,
    DatabaseArg,
    DistinctOpt,
    ExactOpt,
    ExportForOpt,
    ExportLayoutOpt,
    ExportOpt,
    FanoutOpt,
    FillOpt,
    FooterCachedOpt,
    ForceOpt,
    FrontierOpt,
    HeaderOpt,
    HoldoutOpt,
    HtmlOpt,
    InternalFillOpt,
    JsonOpt,
    KeyBytesOpt,
    KeyOpt,
    KppOpt,
    LogColumnOpt,
    LogOpt,
    LogSqlOpt,
    MaxHeightOpt,
    MaxPagesOpt,
    MaxRowGroupsOpt,
    MemoryOpt,
    MinGroupRowsOpt,
    ModelOpt,
    OrderOpt,
    PageSizeOpt,
    PoolBytesOpt,
    PoolOpt,
    RecordOpt,
    ReplayOpt,
    RowGroupRowsOpt,
    ScanOpt,
    SmoothOpt,
    StorageOpt,
    SvgOpt,
    TableOpt,
    TruncateOpt,
)
from .cli_rowgroups import parse_columns, recommend_parquet
from .cli_support import check_model, guard, need_log, parse_storage, read_query, warn
from .demo import DEMO_KEY, DEMO_LOG, DEMO_TABLE, build_demo
from .errors import OutputRefused, SettingInvalid
from .export import check_destination, check_target, write_layout
from .pictures import save_pictures
from .progress import steps
from .report import render_run
from .rowgroups.plan import EVEN_ROWS, MIN_ROWS, RowGroupOptions
from .structures import structure_for, structure_names
from .workload import load_workload

app = typer.Typer(
    add_completion=False,
    no_args_is_help=True,
    help="Page-layout advice for read-mostly indexes under skewed lookups.",
)


def _version(value: bool) -> None:
    if value:
        from importlib.metadata import PackageNotFoundError, version

        try:
            print(f"advisor {version('advisor')}")
        except PackageNotFoundError:  # pragma: no cover - running from a source tree
            print("advisor (not installed)")
        raise typer.Exit(0)


@app.callback()
def _main(
    show_version: Annotated[
        bool, typer.Option("--version", help="Print the version and exit.", callback=_version, is_eager=True)
    ] = False,
) -> None:
    """Page-layout advice for read-mostly indexes under skewed lookups."""


def _run(
    database,
    table,
    key,
    log,
    request: Request,
    as_json,
    export,
    export_for,
    force,
    log_column=None,
    count_column=None,
    distinct_keys=False,
    memory_limit=None,
    svg=None,
    html=None,
    log_sql=None,
    export_layout="advised",
):
    """Open, analyse, export, render: the whole command, with no figures computed here."""
    if export is not None:
        check_destination(export)
    for picture in (svg, html):
        if picture is not None:
            if picture.exists() and not force:
                raise OutputRefused(f"{picture} exists; pass --force to replace it")
            if not picture.parent.exists():
                raise OutputRefused(f"directory {picture.parent} does not exist")
    t0 = time.perf_counter()
    interrupt.checkpoint("read")
    query = read_query(log_sql)
    with steps() as progress:
        progress.step("reading the table and aggregating the log in DuckDB")
        with load_workload(
            database, table, key, log, log_column, count_column, distinct_keys, memory_limit, query
        ) as wl:
            wl.info["database"] = str(database)
            t_hist = time.perf_counter() - t0
            interrupt.checkpoint("plan")
            result = analyse(wl, request, lambda i, step: progress.step(f"plan {i + 1}: {step}"))
            run = result.run
            if export is not None:
                progress.step("writing the export")
                targets_out = export_paths(export, result.plans, export_for)
                for _, path in targets_out:
                    check_target(path, force)
                chosen = [chosen_layout(plan, wl.hist, export_layout)[0] for plan, _ in targets_out]
                run["exports"] = [
                    str(write_layout(wl, layout, path, replace=force))
                    for layout, (_, path) in zip(chosen, targets_out, strict=True)
                ]
            run["timings"] = {
                "histogram_seconds": round(t_hist, 3),
                "total_seconds": round(time.perf_counter() - t0, 3),
            }
    if svg or html:
        run["pictures"] = save_pictures(run, render_run(run), svg, html)
    warn(run.get("warnings", []))
    if as_json:
        print(json.dumps(run, indent=2, default=str))
    else:
        console = Console(highlight=False)
        console.print(render_run(run))
        for path in run.get("pictures", []):
            console.print(f"Report saved to {path}", style="green")


@app.command("recommend")
def recommend_cmd(
    database: DatabaseArg,
    table: TableOpt,
    key: KeyOpt,
    log: LogOpt = None,
    log_sql: LogSqlOpt = None,
    log_column: LogColumnOpt = None,
    count_column: CountColumnOpt = None,
    page_size: PageSizeOpt = None,
    keys_per_page: KppOpt = None,
    page_header: HeaderOpt = PageSettings.page_header,
    record_pointer: RecordOpt = PageSettings.record_pointer,
    child_pointer: ChildOpt = PageSettings.child_pointer,
    key_bytes: KeyBytesOpt = None,
    as_json: JsonOpt = False,
    export: ExportOpt = None,
    export_for: ExportForOpt = None,
    export_layout: ExportLayoutOpt = "advised",
    force: ForceOpt = False,
    distinct_keys: DistinctOpt = False,
    pool_pages: PoolOpt = None,
    order_column: OrderOpt = None,
    replay_limit: ReplayOpt = 20_000_000,
    storage: StorageOpt = "nvme",
    pool_bytes: PoolBytesOpt = None,
    svg: SvgOpt = None,
    html: HtmlOpt = None,
    holdout: HoldoutOpt = 0.2,
    smoothing: SmoothOpt = 0.0,
    scan_to: ScanOpt = None,
    model: ModelOpt = "btree",
    fanout: FanoutOpt = None,
    fill_factor: FillOpt = 1.0,
    internal_fill: InternalFillOpt = None,
    current: CurrentOpt = None,
    truncate_separators: TruncateOpt = False,
    exact_seconds: ExactOpt = 5.0,
    memory_limit: MemoryOpt = None,
    max_pages: MaxPagesOpt = "even",
    max_height: MaxHeightOpt = "even",
    show_frontier: FrontierOpt = True,
    columns: ColumnsOpt = None,
    footer_cached: FooterCachedOpt = False,
    row_group_rows: RowGroupRowsOpt = EVEN_ROWS,
    max_row_groups: MaxRowGroupsOpt = "even",
    min_group_rows: MinGroupRowsOpt = MIN_ROWS,
) -> None:
    """Recommend a page layout for an index on TABLE.KEY and compare it with the even split."""
    with guard():
        need_log(log, log_sql)
        check_model(model, keys_per_page, fanout)
        if model == "parquet":
            if svg or current or html is not None:
                raise SettingInvalid(
                    "--model parquet takes no --svg, --html or --current yet; "
                    "use --json, --export, or write the file with advisor build --model parquet"
                )
            opts = RowGroupOptions(
                parse_columns(columns),
                footer_cached,
                row_group_rows,
                max_row_groups,
                min_group_rows,
                show_frontier,
                order_column,
                holdout,
                scan_to,
            )
            recommend_parquet(
                database,
                table,
                key,
                log,
                log_sql,
                log_column,
                count_column,
                memory_limit,
                opts,
                as_json,
                export,
                force,
            )
            return
        if export_layout not in ("advised", "even", "balanced"):
            raise SettingInvalid(f"--export-layout must be advised, even or balanced, got {export_layout!r}")
        if export_layout == "balanced" and not all(structure_for(m).has_balanced_shape for m in structure_names(model)):
            raise SettingInvalid("--export-layout balanced is a B+ tree: give --model bplus")
        unused = [
            (export_layout != "advised" and export is None, "--export-layout has no effect without --export"),
            (holdout != 0.2 and not order_column, "--holdout has no effect without --order-column"),
            (replay_limit != 20_000_000 and not order_column, "--replay-limit has no effect without --order-column"),
            (
                fanout is not None and not keys_per_page,
                "--fanout is set by the page size; it applies with --keys-per-page",
            ),
            (
                (storage != "nvme" or pool_bytes) and not (page_size or not keys_per_page),
                "--storage and --pool-bytes need page sizes (the page-size choice); with --keys-per-page only they do nothing",
            ),
        ]
        warn([text for hit, text in unused if hit])
        settings = PageSettings(
            list(page_size or []),
            list(keys_per_page or []),
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
            truncate_separators,
            list(pool_pages or []) or None,
            order_column,
            replay_limit,
            holdout,
            scan_to,
            parse_storage(storage),
            pool_bytes,
            exact_seconds,
            BudgetSpec(max_pages, max_height),
            show_frontier,
            current,
        )
        _run(
            database,
            table,
            key,
            log,
            request,
            as_json,
            export,
            export_for,
            force,
            log_column,
            count_column,
            distinct_keys,
            memory_limit,
            svg,
            html,
            log_sql,
            export_layout,
        )


@app.command("demo")
def demo_cmd(
    directory: Annotated[
        Optional[Path], typer.Option("--dir", help="Where to build the demo database (default: the user cache).")
    ] = None,
    seed: Annotated[int, typer.Option("--seed", help="Seed of the generated workload.")] = 7,
    keys: Annotated[int, typer.Option("--keys", help="Number of catalogue keys.", min=1, max=2_000_000)] = 200_000,
    lookups: Annotated[
        int, typer.Option("--lookups", help="Number of logged lookups.", min=0, max=20_000_000)
    ] = 1_000_000,
    page_size: PageSizeOpt = None,
    keys_per_page: KppOpt = None,
    as_json: JsonOpt = False,
    export: ExportOpt = None,
    force: ForceOpt = False,
    svg: SvgOpt = None,
    html: HtmlOpt = None,
    model: Annotated[str, typer.Option("--model", help="Index structure: btree, bplus or both.")] = "btree",
    max_pages: MaxPagesOpt = "even",
    max_height: MaxHeightOpt = "even",
) -> None:
    """Build the invented demo catalogue (once per seed) and print the full report on it."""
    with guard():
        with steps() as progress:
            progress.step("building the demo database (once per seed)")
            db = build_demo(directory, seed=seed, keys=keys, lookups=lookups)
        if model not in ("btree", "bplus", "both"):
            raise SettingInvalid(f"--model must be btree, bplus or both, got {model!r}")
        if model != "btree" and keys_per_page:
            raise SettingInvalid("the demo's B+-tree plans take page sizes, not --keys-per-page")
        settings = PageSettings(list(page_size or []), list(keys_per_page or []), model=model)
        request = Request(settings, order_column="lookup_seq", budget=BudgetSpec(max_pages, max_height))
        _run(db, DEMO_TABLE, DEMO_KEY, DEMO_LOG, request, as_json, export, None, force, svg=svg, html=html)


app.command("build")(build_cmd)
app.command("probe")(probe_cmd)
app.command("verify")(verify_cmd)


def main() -> None:  # pragma: no cover - console script entry
    from .entry import main as entry_main

    entry_main()


if __name__ == "__main__":  # pragma: no cover
    main()
