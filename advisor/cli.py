"""Command line: parse, call the library, render, and turn library errors into exit codes.

Exit codes: 0 success; 2 usage error (Typer); 3 input not found; 4 input unusable; 5 setting
impossible; 6 database locked; 7 output refused or failed; 8 invalid layout; 1 unexpected
internal error; 130 interrupted.
"""

from __future__ import annotations

import io
import json
import sys
import time
from contextlib import contextmanager
from pathlib import Path
from typing import Annotated, Optional

import duckdb
import typer
from rich.console import Console
from rich.progress import BarColumn, Progress, SpinnerColumn, TextColumn, TimeElapsedColumn

from . import interrupt
from .advise import PageSettings, Request, analyse, export_paths
from .demo import DEMO_KEY, DEMO_LOG, DEMO_TABLE, build_demo
from .atomic import atomic_path
from .budget import BudgetSpec
from .errors import AdvisorError, OutputRefused, SettingInvalid
from .export import check_destination, check_target, write_layout
from .pagesize import PROFILES, StorageProfile
from .report import render_run
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


def _progress(enabled: bool) -> Progress:
    return Progress(
        SpinnerColumn(), TextColumn("{task.description}"), BarColumn(), TimeElapsedColumn(),
        console=Console(stderr=True), transient=True, disable=not enabled,
    )  # fmt: skip


TableOpt = Annotated[str, typer.Option("--table", help="Table holding the indexed key column.")]
KeyOpt = Annotated[str, typer.Option("--key", help="The indexed key column.")]
LogOpt = Annotated[Optional[str], typer.Option("--log", help="Lookup log: a table in the database, or a .parquet/.csv file.")]
PageSizeOpt = Annotated[Optional[list[int]], typer.Option("--page-size", help="Page size in bytes (repeatable; default 4096, 8192, 16384).")]
KppOpt = Annotated[Optional[list[int]], typer.Option("--keys-per-page", help="Capacity c in keys per page, instead of a page size (repeatable).")]
JsonOpt = Annotated[bool, typer.Option("--json", help="Print one JSON object on stdout instead of the report.")]
ExportOpt = Annotated[Optional[Path], typer.Option("--export", help="Write the recommended pages and their keys (.csv, .json, .parquet, .duckdb).")]
ExportForOpt = Annotated[Optional[int], typer.Option("--export-for", help="Export only the plan for this page size (or keys per page).")]
ForceOpt = Annotated[bool, typer.Option("--force", help="Replace an existing export or picture file.")]
SvgOpt = Annotated[Optional[Path], typer.Option("--svg", help="Also save the whole report as an SVG picture.")]
MaxPagesOpt = Annotated[str, typer.Option("--max-pages", help="Most pages a layout may use: even (the even split's count), a ratio such as 1.25x, a page count, or none.")]
FrontierOpt = Annotated[bool, typer.Option("--frontier/--no-frontier", help="Also plan each page size at 1.1x to 2x the pages and with no page limit.")]
MaxHeightOpt = Annotated[str, typer.Option("--max-height", help="Most levels a layout may have: even, even+K, a number, or none.")]
HtmlOpt = Annotated[Optional[Path], typer.Option("--html", help="Also save the whole report as an HTML page.")]


def save_pictures(run: dict, svg: Path | None, html: Path | None, replace: bool) -> None:
    """Render the report on a recording console and save it as SVG and/or HTML, atomically."""
    console = Console(record=True, width=110, file=io.StringIO(), force_terminal=True)
    console.print(render_run(run))
    for path, kind in ((svg, "svg"), (html, "html")):
        if path is None:
            continue
        with atomic_path(path) as tmp:
            if kind == "svg":
                console.save_svg(str(tmp), title="advisor report", clear=False)
            else:
                console.save_html(str(tmp), clear=False)


def _run(database, table, key, log, request: Request, as_json, export, export_for, force, log_column=None,
         count_column=None, distinct_keys=False, memory_limit=None, svg=None, html=None):  # fmt: skip
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
    with load_workload(database, table, key, log, log_column, count_column, distinct_keys, memory_limit) as wl:
        wl.info["database"] = str(database)
        t_hist = time.perf_counter() - t0
        with _progress(not as_json and sys.stderr.isatty()) as bar:
            task = bar.add_task("planning")
            interrupt.checkpoint("plan")
            result = analyse(wl, request, lambda i, step: bar.update(task, description=f"plan {i + 1}: {step}"))
        run = result.run
        if export is not None:
            targets_out = export_paths(export, result.plans, export_for)
            for _, path in targets_out:
                check_target(path, force)
            run["exports"] = [str(write_layout(wl, plan.recommended, path, replace=force)) for plan, path in targets_out]
        run["timings"] = {"histogram_seconds": round(t_hist, 3), "total_seconds": round(time.perf_counter() - t0, 3)}
    if as_json:
        print(json.dumps(run, indent=2, default=str))
    else:
        Console(highlight=False).print(render_run(run))
    if svg or html:
        save_pictures(run, svg, html, force)


def parse_storage(text: str) -> StorageProfile:
    """A named profile, or 'latency_us,mb_per_s' for a custom one."""
    if text in PROFILES:
        return PROFILES[text]
    try:
        lat, bw = (float(x) for x in text.split(","))
    except ValueError:
        raise SettingInvalid(f"--storage must be one of {', '.join(PROFILES)} or LATENCY_US,MB_PER_S, got {text!r}") from None
    if lat < 0 or bw <= 0:
        raise SettingInvalid("--storage latency must be >= 0 and bandwidth > 0")
    return StorageProfile("custom", lat, bw)


@app.command("recommend")
def recommend_cmd(
    database: Annotated[Path, typer.Argument(help="DuckDB database file (opened read-only).")],
    table: TableOpt,
    key: KeyOpt,
    log: LogOpt = None,
    log_column: Annotated[Optional[str], typer.Option("--log-column", help="Looked-up value column in the log (default: the key's name).")] = None,
    count_column: Annotated[Optional[str], typer.Option("--count-column", help="Log column with a lookup count per row (pre-aggregated log).")] = None,
    page_size: PageSizeOpt = None,
    keys_per_page: KppOpt = None,
    page_header: Annotated[int, typer.Option("--page-header", help="Bytes per page kept for the header.")] = PageSettings.page_header,
    record_pointer: Annotated[int, typer.Option("--record-pointer", help="Bytes per record pointer.")] = PageSettings.record_pointer,
    child_pointer: Annotated[int, typer.Option("--child-pointer", help="Bytes per child-page pointer.")] = PageSettings.child_pointer,
    key_bytes: Annotated[Optional[float], typer.Option("--key-bytes", help="Bytes per key (default: from the column type or measured).")] = None,
    as_json: JsonOpt = False,
    export: ExportOpt = None,
    export_for: ExportForOpt = None,
    force: ForceOpt = False,
    distinct_keys: Annotated[bool, typer.Option("--distinct-keys", help="Accept a key column with repeated values: one entry per distinct value.")] = False,
    pool_pages: Annotated[Optional[list[int]], typer.Option("--pool-pages", help="Buffer pool size in pages (repeatable; default 0.1% to 10% of the index).", min=1)] = None,
    order_column: Annotated[Optional[str], typer.Option("--order-column", help="Log column giving lookup order (time or sequence): enables the LRU replay.")] = None,
    replay_limit: Annotated[int, typer.Option("--replay-limit", help="Replay at most this many lookups (the earliest).", min=1)] = 1_000_000,
    storage: Annotated[str, typer.Option("--storage", help="Storage profile for the page-size choice: nvme, sata-ssd, network-disk, hdd, or LATENCY_US,MB_PER_S.")] = "nvme",
    pool_bytes: Annotated[Optional[int], typer.Option("--pool-bytes", help="Buffer pool bytes for the page-size choice (default: 1% of the index).", min=1)] = None,
    svg: SvgOpt = None,
    html: HtmlOpt = None,
    holdout: Annotated[float, typer.Option("--holdout", help="With --order-column: share of the latest lookups held out to judge a plan fitted on the rest (0 turns it off).", min=0.0, max=0.9)] = 0.2,
    smoothing: Annotated[float, typer.Option("--smoothing", help="Blend the fitted histogram with uniform weight: 0 none .. 1 all uniform.", min=0.0, max=1.0)] = 0.0,
    scan_to: Annotated[Optional[str], typer.Option("--scan-to", help="Log column with a range scan's upper bound; rows where it is set scan from the looked-up value to it.")] = None,
    model: Annotated[str, typer.Option("--model", help="Index structure: btree (keys in every page), bplus (keys only in leaves) or both side by side.")] = "btree",
    fanout: Annotated[Optional[int], typer.Option("--fanout", help="bplus: children per internal page, with --keys-per-page (which then sets the leaf capacity).", min=2)] = None,
    fill_factor: Annotated[float, typer.Option("--fill-factor", help="bplus: share of each leaf page filled (0..1].")] = 1.0,
    truncate_separators: Annotated[bool, typer.Option("--truncate-separators", help="bplus, string keys: shorten separators to the shortest prefix that still separates two leaves.")] = False,
    exact_seconds: Annotated[float, typer.Option("--exact-seconds", help="Run the exact optimiser when it should finish within this many seconds per page size.", min=0.0)] = 5.0,
    memory_limit: Annotated[Optional[str], typer.Option("--memory-limit", help="Cap DuckDB's memory while reading the log, e.g. 2GB (it spills to disk beyond).")] = None,
    max_pages: MaxPagesOpt = "even",
    max_height: MaxHeightOpt = "even",
    show_frontier: FrontierOpt = True,
) -> None:
    """Recommend a page layout for an index on TABLE.KEY and compare it with the even split."""
    with _guard():
        if model not in ("btree", "bplus", "both"):
            raise SettingInvalid(f"--model must be btree, bplus or both, got {model!r}")
        if model in ("bplus", "both") and keys_per_page and not fanout:
            raise SettingInvalid("--model bplus with --keys-per-page needs --fanout")
        settings = PageSettings(list(page_size or []), list(keys_per_page or []), page_header, record_pointer,
                                child_pointer, key_bytes, model, fill_factor)  # fmt: skip
        request = Request(settings, smoothing, fanout, truncate_separators, list(pool_pages or []) or None, order_column,
                          replay_limit, holdout, scan_to, parse_storage(storage), pool_bytes, exact_seconds,
                          BudgetSpec(max_pages, max_height), show_frontier)  # fmt: skip
        _run(database, table, key, log, request, as_json, export, export_for, force, log_column, count_column,
             distinct_keys, memory_limit, svg, html)  # fmt: skip


@app.command("demo")
def demo_cmd(
    directory: Annotated[Optional[Path], typer.Option("--dir", help="Where to build the demo database (default: the user cache).")] = None,
    seed: Annotated[int, typer.Option("--seed", help="Seed of the generated workload.")] = 7,
    keys: Annotated[int, typer.Option("--keys", help="Number of catalogue keys.", min=1, max=2_000_000)] = 200_000,
    lookups: Annotated[int, typer.Option("--lookups", help="Number of logged lookups.", min=0, max=20_000_000)] = 1_000_000,
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
        db = build_demo(directory, seed=seed, keys=keys, lookups=lookups)
        if model not in ("btree", "bplus", "both"):
            raise SettingInvalid(f"--model must be btree, bplus or both, got {model!r}")
        if model != "btree" and keys_per_page:
            raise SettingInvalid("the demo's B+-tree plans take page sizes, not --keys-per-page")
        settings = PageSettings(list(page_size or []), list(keys_per_page or []), model=model)
        request = Request(settings, order_column="lookup_seq", replay_limit=300_000, budget=BudgetSpec(max_pages, max_height))
        _run(db, DEMO_TABLE, DEMO_KEY, DEMO_LOG, request, as_json, export, None, force, svg=svg, html=html)


def main() -> None:  # pragma: no cover - console script entry
    from .entry import main as entry_main

    entry_main()


if __name__ == "__main__":  # pragma: no cover
    main()
