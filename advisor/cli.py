"""Command line: parse, call the library, render, and turn library errors into exit codes.

Exit codes: 0 success; 2 usage error (Typer); 3 input not found; 4 input unusable; 5 setting
impossible; 6 database locked; 7 output refused or failed; 8 invalid layout; 1 unexpected
internal error; 130 interrupted.
"""

from __future__ import annotations

import io
import json
import os
import sys
import time
from contextlib import contextmanager
from pathlib import Path
from typing import Annotated, Optional

import duckdb
import typer
from rich.console import Console
from rich.progress import BarColumn, Progress, SpinnerColumn, TextColumn, TimeElapsedColumn

from .advise import PageSettings, advise, capacities, export_paths
from .demo import DEMO_KEY, DEMO_LOG, DEMO_TABLE, build_demo
from .errors import AdvisorError
from .export import check_destination, check_target, write_layout
from .serialize import run_dict
from .report import render_run
from .workload import load_replay, load_scans, load_split, load_workload, truncated_separator_bytes
from dataclasses import replace
from .scans import scan_figures
from .holdout import holdout_rows
from .planner import PlanOptions
from .bufferpool import pinned_misses, pool_figures
from .balanced import balanced_bplus_layout
from .layout import evaluate
from .serialize import cost_dict
from .pagesize import PROFILES, StorageProfile, default_pool_bytes, page_size_table
from .errors import OutputRefused, SettingInvalid

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
        yield
    except AdvisorError as e:
        _fail(str(e), e.exit_code)
    except (KeyboardInterrupt, duckdb.InterruptException):
        _fail("interrupted; no output file was left behind", 130)
    except typer.Exit:
        raise
    except MemoryError:
        _fail("out of memory; try fewer page sizes or a smaller table", 1)
    except Exception as e:  # noqa: BLE001 - the promise is no traceback
        if "interrupted" in str(e).lower():  # DuckDB turns Ctrl-C inside a query into its own error
            _fail("interrupted; no output file was left behind", 130)
        _fail(f"internal error ({type(e).__name__}): {e}", 1)


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
HtmlOpt = Annotated[Optional[Path], typer.Option("--html", help="Also save the whole report as an HTML page.")]


def save_pictures(run: dict, svg: Path | None, html: Path | None, replace: bool) -> None:
    """Render the report on a recording console and save it as SVG and/or HTML, atomically."""
    console = Console(record=True, width=110, file=io.StringIO(), force_terminal=True)
    console.print(render_run(run))
    for path, kind in ((svg, "svg"), (html, "html")):
        if path is None:
            continue
        tmp = path.with_name(f".{path.name}.{os.getpid()}.partial")
        try:
            if kind == "svg":
                console.save_svg(str(tmp), title="advisor report", clear=False)
            else:
                console.save_html(str(tmp), clear=False)
            os.replace(tmp, path)
        finally:
            tmp.unlink(missing_ok=True)


def _run(database, table, key, log, settings, as_json, export, export_for, force, log_column=None, count_column=None,
         distinct_keys=False, pool_pages=None, order_column=None, replay_limit=1_000_000, storage=None,
         pool_bytes=None, svg=None, html=None, holdout=0.2, smoothing=0.0, scan_to=None, fanout=None,
         truncate=False, memory_limit=None):  # fmt: skip
    stdout = Console(highlight=False)
    if export is not None:
        check_destination(export)
    for picture in (svg, html):
        if picture is not None:
            if picture.exists() and not force:
                raise OutputRefused(f"{picture} exists; pass --force to replace it")
            if not picture.parent.exists():
                raise OutputRefused(f"directory {picture.parent} does not exist")
    t0 = time.perf_counter()
    with load_workload(database, table, key, log, log_column, count_column, distinct_keys, memory_limit) as wl:
        t_hist = time.perf_counter() - t0
        targets = capacities(settings, wl.key_bytes)
        if truncate:
            if settings.model != "bplus":
                raise SettingInvalid("--truncate-separators applies to --model bplus")
            targets = [(c, replace(g, separator_bytes=truncated_separator_bytes(wl, c)) if g else g) for c, g in targets]
        seen, unique = set(), []
        for c, g in targets:
            tag = (c, g.page_size if g else None)
            if tag not in seen:
                seen.add(tag)
                unique.append((c, g))
        with _progress(not as_json and sys.stderr.isatty()) as bar:
            task = bar.add_task("planning", total=len(unique))

            def on_plan(i: int, step: str) -> None:
                bar.update(task, completed=i, description=f"c={unique[i][0]}: {step}")

            options = PlanOptions(smoothing=smoothing, model=settings.model, fanout=fanout or 0)
            plans = advise(wl.hist, unique, options, on_plan=on_plan)
            bar.update(task, completed=len(unique))
        replay = None
        if order_column:
            if not log:
                raise SettingInvalid("--order-column needs --log")
            replay = load_replay(wl, order_column, replay_limit)
        pools = [pool_figures(p.uniform, p.recommended, wl.hist, replay, pool_pages) for p in plans]
        balanced = None
        if settings.model == "bplus":
            balanced = []
            for p in plans:
                layout, sizes, how = balanced_bplus_layout(wl.hist, p.uniform, pool_pages)
                cost = evaluate(layout, wl.hist)
                balanced.append(cost_dict(cost) | {"method": how, "buffer_pool": [
                    {"pool_pages": b, "uniform_pinned": u, "balanced_pinned": m}
                    for b, u, m in zip(sizes, pinned_misses(p.uniform, wl.hist, sizes), pinned_misses(layout, wl.hist, sizes))
                ]})  # fmt: skip
        scans = None
        if scan_to:
            if not log:
                raise SettingInvalid("--scan-to needs --log")
            first, last, weight, points = load_scans(wl, scan_to)
            scans = [scan_figures(p, points, first, last, weight) for p in plans]
        held = None
        if order_column and holdout > 0:
            train, test = load_split(wl, order_column, holdout)
            alphas = [0.0] + ([smoothing] if smoothing > 0 else [])
            held = {"fraction": holdout, "train_lookups": train.total, "test_lookups": test.total,
                    "rows": holdout_rows(train, test, unique, alphas, options)}  # fmt: skip
        profile = storage if storage is not None else PROFILES["nvme"]
        choice = page_size_table(plans, wl.hist, profile, pool_bytes or default_pool_bytes(plans))
        written: list[str] = []
        if export is not None:
            targets_out = export_paths(export, plans, export_for)
            for _, path in targets_out:
                check_target(path, force)
            for plan, path in targets_out:
                written.append(str(write_layout(wl, plan.recommended, path, replace=force)))
        inputs = {
            "database": str(database), "table": wl.table, "key": wl.key, "key_type": wl.key_type,
            "key_bytes": round(wl.key_bytes, 2), "log": wl.log or "(none)",
            **{k: v for k, v in wl.info.items() if k not in ("log_source", "weight_sql")},
            "replayed_lookups": int(replay.outcomes.size) if replay is not None else None,
        }  # fmt: skip
        run = run_dict(wl.hist, plans, inputs, written, pools)
        if choice["rows"]:
            run["page_size_choice"] = choice
        if held is not None:
            run["holdout"] = held
        if scans is not None:
            for entry, figures in zip(run["plans"], scans):
                entry["range_scans"] = figures
        if balanced is not None:
            for entry, figures in zip(run["plans"], balanced):
                entry["balanced"] = figures
        run["timings"] = {"histogram_seconds": round(t_hist, 3), "total_seconds": round(time.perf_counter() - t0, 3)}
    if as_json:
        print(json.dumps(run, indent=2, default=str))
    else:
        stdout.print(render_run(run))
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


@app.command("plan")
def plan_cmd(
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
    model: Annotated[str, typer.Option("--model", help="Index structure: btree (keys in every page) or bplus (keys only in leaves).")] = "btree",
    fanout: Annotated[Optional[int], typer.Option("--fanout", help="bplus: children per internal page, with --keys-per-page (which then sets the leaf capacity).", min=2)] = None,
    fill_factor: Annotated[float, typer.Option("--fill-factor", help="bplus: share of each leaf page filled (0..1].")] = 1.0,
    truncate_separators: Annotated[bool, typer.Option("--truncate-separators", help="bplus, string keys: shorten separators to the shortest prefix that still separates two leaves.")] = False,
    memory_limit: Annotated[Optional[str], typer.Option("--memory-limit", help="Cap DuckDB's memory while reading the log, e.g. 2GB (it spills to disk beyond).")] = None,
) -> None:
    """Recommend a page layout for an index on TABLE.KEY and compare it with the even split."""
    with _guard():
        if model not in ("btree", "bplus"):
            raise SettingInvalid(f"--model must be btree or bplus, got {model!r}")
        if model == "bplus" and keys_per_page and not fanout:
            raise SettingInvalid("--model bplus with --keys-per-page needs --fanout")
        settings = PageSettings(list(page_size or []), list(keys_per_page or []), page_header, record_pointer,
                                child_pointer, key_bytes, model, fill_factor)  # fmt: skip
        _run(database, table, key, log, settings, as_json, export, export_for, force, log_column, count_column,
             distinct_keys, pool_pages, order_column, replay_limit, parse_storage(storage), pool_bytes, svg, html,
             holdout, smoothing, scan_to, fanout, truncate_separators, memory_limit)  # fmt: skip


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
) -> None:
    """Build the invented demo catalogue (once per seed) and print the full report on it."""
    with _guard():
        db = build_demo(directory, seed=seed, keys=keys, lookups=lookups)
        settings = PageSettings(list(page_size or []), list(keys_per_page or []))
        _run(db, DEMO_TABLE, DEMO_KEY, DEMO_LOG, settings, as_json, export, None, force,
             order_column="lookup_seq", replay_limit=300_000, svg=svg, html=html)  # fmt: skip


def main() -> None:  # pragma: no cover - console script entry
    app()


if __name__ == "__main__":  # pragma: no cover
    main()
