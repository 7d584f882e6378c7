"""Command line: parse, call the library, render, and turn library errors into exit codes.

Exit codes: 0 success; 2 usage error (Typer); 3 input not found; 4 input unusable; 5 setting
impossible; 6 database locked; 7 output refused or failed; 8 invalid layout; 1 unexpected
internal error; 130 interrupted.
"""

from __future__ import annotations

import json
import time
from contextlib import contextmanager
from pathlib import Path
from typing import Annotated, Optional

import duckdb
import typer
from rich.console import Console

from . import interrupt
from .advise import PageSettings, Request, analyse, export_paths
from .budget import BudgetSpec
from .demo import DEMO_KEY, DEMO_LOG, DEMO_TABLE, build_demo
from .errors import AdvisorError, InputInvalid, InputNotFound, LayoutInvalid, OutputRefused, SettingInvalid
from .export import check_destination, check_target, write_layout
from .pagesize import PROFILES, StorageProfile
from .pictures import save_pictures
from .progress import steps
from .report import render_probe, render_run
from .workload import load_workload

app = typer.Typer(
    add_completion=False,
    no_args_is_help=True,
    help="Page-layout advice for read-mostly indexes under skewed lookups.",
)


def _fail(message: str, code: int) -> None:
    Console(stderr=True, highlight=False).print(f"advisor: error: {message}", markup=False, soft_wrap=True)
    raise typer.Exit(code)


@contextmanager
def _guard():
    """One line and a distinct exit code for every failure; never a traceback."""
    try:
        with interrupt.armed():
            yield
        if interrupt.interrupted():  # a library swallowed the signal: still answer it
            raise KeyboardInterrupt
    except AdvisorError as e:
        _fail(str(e), e.exit_code)
    except (KeyboardInterrupt, duckdb.InterruptException):
        _interrupted()
    except typer.Exit:
        raise
    except MemoryError:
        _fail("out of memory; try fewer page sizes or a smaller table", 1)
    except Exception as e:  # noqa: BLE001 - the promise is no traceback
        if "interrupted" in str(e).lower():  # DuckDB turns Ctrl-C inside a query into its own error
            _interrupted()
        _fail(f"internal error ({type(e).__name__}): {e}", 1)


def _interrupted() -> None:
    Console(stderr=True, highlight=False).print(interrupt.message(), markup=False, soft_wrap=True)
    raise typer.Exit(130)


IN, GEO, BUD, OUT, WL, SOLVE = "Table and log", "Page geometry", "Budget", "Output", "Workload checks", "Solver"


def _opt(name: str, text: str, panel: str, **kw):
    return typer.Option(name, help=text, rich_help_panel=panel, **kw)


DatabaseArg = Annotated[Path, typer.Argument(help="DuckDB database file (opened read-only).", metavar="DATABASE")]
TableOpt = Annotated[str, _opt("--table", "Table holding the indexed key column.", IN, metavar="NAME")]
KeyOpt = Annotated[str, _opt("--key", "The indexed key column.", IN, metavar="COLUMN")]
LogOpt = Annotated[
    Optional[str],
    _opt("--log", "Lookup log: a table in the database, or a .parquet/.csv file.", IN, metavar="TABLE|FILE"),
]
LogSqlOpt = Annotated[
    Optional[Path],
    _opt(
        "--log-sql",
        "A file with a query whose result is the lookup log, run read-only (see workloads/).",
        IN,
        metavar="FILE",
    ),
]
LogColumnOpt = Annotated[
    Optional[str],
    _opt("--log-column", "Looked-up value column in the log (default: the key's name).", IN, metavar="COLUMN"),
]
CountColumnOpt = Annotated[
    Optional[str],
    _opt("--count-column", "Log column with a lookup count per row (pre-aggregated log).", IN, metavar="COLUMN"),
]
DistinctOpt = Annotated[
    bool, _opt("--distinct-keys", "Accept a key column with repeated values: one entry per distinct value.", IN)
]
MemoryOpt = Annotated[
    Optional[str],
    _opt(
        "--memory-limit",
        "Cap DuckDB's memory while reading the log, e.g. 2GB (it spills to disk beyond).",
        IN,
        metavar="SIZE",
    ),
]
PageSizeOpt = Annotated[
    Optional[list[int]],
    _opt("--page-size", "Page size in bytes (repeatable; default 4096, 8192, 16384).", GEO, metavar="BYTES"),
]
KppOpt = Annotated[
    Optional[list[int]],
    _opt("--keys-per-page", "Capacity c in keys per page, instead of a page size (repeatable).", GEO, metavar="C"),
]
HeaderOpt = Annotated[int, _opt("--page-header", "Bytes per page kept for the header.", GEO, metavar="BYTES")]
RecordOpt = Annotated[int, _opt("--record-pointer", "Bytes per record pointer.", GEO, metavar="BYTES")]
ChildOpt = Annotated[int, _opt("--child-pointer", "Bytes per child-page pointer.", GEO, metavar="BYTES")]
KeyBytesOpt = Annotated[
    Optional[float],
    _opt("--key-bytes", "Bytes per key (default: from the column type or measured).", GEO, metavar="BYTES"),
]
ModelOpt = Annotated[
    str,
    _opt(
        "--model",
        "Index structure: btree (keys in every page), bplus (keys only in leaves) or both side by side.",
        GEO,
        metavar="btree|bplus|both",
    ),
]
FanoutOpt = Annotated[
    Optional[int],
    _opt(
        "--fanout",
        "bplus: children per internal page, with --keys-per-page (which then sets the leaf capacity).",
        GEO,
        min=2,
        metavar="F",
    ),
]
FillOpt = Annotated[float, _opt("--fill-factor", "bplus: share of each leaf page filled (0..1].", GEO, metavar="SHARE")]
TruncateOpt = Annotated[
    bool,
    _opt(
        "--truncate-separators",
        "bplus, string keys: shorten separators to the shortest prefix that still separates two leaves.",
        GEO,
    ),
]
MaxPagesOpt = Annotated[
    str,
    _opt(
        "--max-pages",
        "Most pages a layout may use: even (the even split's count), a ratio such as 1.25x, a page count, or none.",
        BUD,
        metavar="SPEC",
    ),
]
MaxHeightOpt = Annotated[
    str, _opt("--max-height", "Most levels a layout may have: even, even+K, a number, or none.", BUD, metavar="SPEC")
]
FrontierOpt = Annotated[
    bool,
    _opt("--frontier/--no-frontier", "Also plan each page size at 1.1x to 2x the pages and with no page limit.", BUD),
]
JsonOpt = Annotated[bool, _opt("--json", "Print one JSON object on stdout instead of the report.", OUT)]
ExportOpt = Annotated[
    Optional[Path],
    _opt(
        "--export", "Write the recommended pages and their keys (.csv, .json, .parquet, .duckdb).", OUT, metavar="FILE"
    ),
]
ExportForOpt = Annotated[
    Optional[int],
    _opt("--export-for", "Export only the plan for this page size (or keys per page).", OUT, metavar="SIZE"),
]
ForceOpt = Annotated[bool, _opt("--force", "Replace an existing output file.", OUT)]
SvgOpt = Annotated[Optional[Path], _opt("--svg", "Also save the whole report as an SVG picture.", OUT, metavar="FILE")]
HtmlOpt = Annotated[Optional[Path], _opt("--html", "Also save the whole report as an HTML page.", OUT, metavar="FILE")]
PoolOpt = Annotated[
    Optional[list[int]],
    _opt(
        "--pool-pages",
        "Buffer pool size in pages (repeatable; default 0.1% to 10% of the index).",
        WL,
        min=1,
        metavar="PAGES",
    ),
]
OrderOpt = Annotated[
    Optional[str],
    _opt(
        "--order-column",
        "Log column giving lookup order (time or sequence): enables the LRU replay.",
        WL,
        metavar="COLUMN",
    ),
]
ReplayOpt = Annotated[
    int, _opt("--replay-limit", "Replay at most this many lookups (the earliest).", WL, min=1, metavar="N")
]
StorageOpt = Annotated[
    str,
    _opt(
        "--storage",
        "Storage profile for the page-size choice: nvme, sata-ssd, network-disk, hdd, or LATENCY_US,MB_PER_S.",
        WL,
        metavar="PROFILE",
    ),
]
PoolBytesOpt = Annotated[
    Optional[int],
    _opt(
        "--pool-bytes",
        "Buffer pool bytes for the page-size choice (default: 1% of the index).",
        WL,
        min=1,
        metavar="BYTES",
    ),
]
HoldoutOpt = Annotated[
    float,
    _opt(
        "--holdout",
        "With --order-column: share of the latest lookups held out to judge a plan fitted on the rest (0 turns it off).",
        WL,
        min=0.0,
        max=0.9,
        metavar="SHARE",
    ),
]
ScanOpt = Annotated[
    Optional[str],
    _opt(
        "--scan-to",
        "Log column with a range scan's upper bound; rows where it is set scan from the looked-up value to it.",
        WL,
        metavar="COLUMN",
    ),
]
SmoothOpt = Annotated[
    float,
    _opt(
        "--smoothing",
        "Blend the fitted histogram with uniform weight: 0 none .. 1 all uniform.",
        SOLVE,
        min=0.0,
        max=1.0,
        metavar="ALPHA",
    ),
]
ExactOpt = Annotated[
    float,
    _opt(
        "--exact-seconds",
        "Run the exact optimiser when it should finish within this many seconds per page size.",
        SOLVE,
        min=0.0,
        metavar="SECONDS",
    ),
]


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
                run["exports"] = [
                    str(write_layout(wl, plan.recommended, path, replace=force)) for plan, path in targets_out
                ]
            run["timings"] = {
                "histogram_seconds": round(t_hist, 3),
                "total_seconds": round(time.perf_counter() - t0, 3),
            }
    if svg or html:
        run["pictures"] = save_pictures(render_run(run), svg, html)
    if as_json:
        print(json.dumps(run, indent=2, default=str))
    else:
        console = Console(highlight=False)
        console.print(render_run(run))
        for path in run.get("pictures", []):
            console.print(f"Report saved to {path}", style="green")


def read_query(path: Path | None) -> str | None:
    """The text of a --log-sql file (None without one)."""
    if path is None:
        return None
    try:
        return Path(path).read_text(encoding="utf-8")
    except FileNotFoundError:
        raise InputNotFound(f"--log-sql file not found: {path}") from None
    except (OSError, UnicodeDecodeError) as e:
        raise InputInvalid(f"cannot read --log-sql file {path}: {e}") from None


def parse_storage(text: str) -> StorageProfile:
    """A named profile, or 'latency_us,mb_per_s' for a custom one."""
    if text in PROFILES:
        return PROFILES[text]
    try:
        lat, bw = (float(x) for x in text.split(","))
    except ValueError:
        raise SettingInvalid(
            f"--storage must be one of {', '.join(PROFILES)} or LATENCY_US,MB_PER_S, got {text!r}"
        ) from None
    if lat < 0 or bw <= 0:
        raise SettingInvalid("--storage latency must be >= 0 and bandwidth > 0")
    return StorageProfile("custom", lat, bw)


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
    truncate_separators: TruncateOpt = False,
    exact_seconds: ExactOpt = 5.0,
    memory_limit: MemoryOpt = None,
    max_pages: MaxPagesOpt = "even",
    max_height: MaxHeightOpt = "even",
    show_frontier: FrontierOpt = True,
) -> None:
    """Recommend a page layout for an index on TABLE.KEY and compare it with the even split."""
    with _guard():
        _check_model(model, keys_per_page, fanout)
        settings = PageSettings(
            list(page_size or []),
            list(keys_per_page or []),
            page_header,
            record_pointer,
            child_pointer,
            key_bytes,
            model,
            fill_factor,
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
        )


def _check_model(model: str, keys_per_page, fanout) -> None:
    if model not in ("btree", "bplus", "both"):
        raise SettingInvalid(f"--model must be btree, bplus or both, got {model!r}")
    if model in ("bplus", "both") and keys_per_page and not fanout:
        raise SettingInvalid("--model bplus with --keys-per-page needs --fanout")


@app.command("build")
def build_cmd(
    database: DatabaseArg,
    table: TableOpt,
    key: KeyOpt,
    out: Annotated[
        Path, _opt("--out", "The index file to write (refused if it exists, unless --force).", OUT, metavar="FILE")
    ],
    log: LogOpt = None,
    log_sql: LogSqlOpt = None,
    log_column: LogColumnOpt = None,
    count_column: CountColumnOpt = None,
    page_size: Annotated[
        Optional[int], _opt("--page-size", "Page size in bytes of the file (default 4096).", GEO, metavar="BYTES")
    ] = None,
    keys_per_page: Annotated[
        Optional[int],
        _opt(
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
    model: Annotated[str, _opt("--model", "Index structure: btree or bplus.", GEO, metavar="btree|bplus")] = "btree",
    fanout: FanoutOpt = None,
    fill_factor: FillOpt = 1.0,
    layout: Annotated[
        str,
        _opt(
            "--layout",
            "Which layout to write: advised or even (the even split, to compare).",
            OUT,
            metavar="advised|even",
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
) -> None:
    """Write the advised (or even-split) layout as a file of fixed-size pages you can probe."""
    with _guard():
        from .advise import plan_one
        from .build import build_index

        if layout not in ("advised", "even"):
            raise SettingInvalid(f"--layout must be advised or even, got {layout!r}")
        _check_model(model, [keys_per_page] if keys_per_page else None, fanout)
        if model == "both":
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
                f"({summary['layout']} {summary['model']} layout), predicted {summary['predicted_page_reads']:.3f} page reads "
                "per lookup. Measure it with: advisor probe FILE DATABASE --log LOG"
            )


@app.command("probe")
def probe_cmd(
    index_file: Annotated[Path, typer.Argument(help="An index file written by advisor build.", metavar="FILE")],
    database: DatabaseArg,
    log: Annotated[
        str,
        _opt(
            "--log", "Lookup log to replay: a table in the database, or a .parquet/.csv file.", IN, metavar="TABLE|FILE"
        ),
    ],
    log_column: LogColumnOpt = None,
    count_column: CountColumnOpt = None,
    order_column: Annotated[
        Optional[str],
        _opt("--order-column", "Replay the log in this column's order (default: as stored).", IN, metavar="COLUMN"),
    ] = None,
    limit: Annotated[
        Optional[int], _opt("--limit", "Replay at most this many log rows.", IN, min=1, metavar="N")
    ] = None,
    pool_pages: Annotated[
        int,
        _opt(
            "--pool-pages",
            "An LRU pool of this many pages in front of the file (0: every page visit is a read).",
            WL,
            min=0,
            metavar="PAGES",
        ),
    ] = 0,
    cold: Annotated[
        bool, _opt("--cold", "Drop the file from the operating system's page cache before the replay.", WL)
    ] = False,
    as_json: JsonOpt = False,
) -> None:
    """Replay a log against an index file: page reads counted against the model's prediction."""
    with _guard():
        from .build import probe_index

        res = probe_index(index_file, database, log, log_column, count_column, order_column, limit, pool_pages, cold)
        if as_json:
            print(json.dumps(res.as_dict(), indent=2))
        else:
            Console(highlight=False).print(render_probe(res.as_dict(), str(index_file)))
        if res.wrong_rows:
            raise LayoutInvalid(f"{res.wrong_rows} found keys returned a row number that is not their table row")


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
    with _guard():
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


def main() -> None:  # pragma: no cover - console script entry
    from .entry import main as entry_main

    entry_main()


if __name__ == "__main__":  # pragma: no cover
    main()
