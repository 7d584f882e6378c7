"""The command line's options, declared once and shared by its commands, grouped into panels
of ``--help`` (table and log, page geometry, budget, output, workload checks, solver)."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

IN, GEO, BUD, OUT, WL, SOLVE = "Table and log", "Page geometry", "Budget", "Output", "Workload checks", "Solver"


def option(name: str, text: str, panel: str, **kw):
    return typer.Option(name, help=text, rich_help_panel=panel, **kw)


DatabaseArg = Annotated[Path, typer.Argument(help="DuckDB database file (opened read-only).", metavar="DATABASE")]
TableOpt = Annotated[str, option("--table", "Table holding the indexed key column.", IN, metavar="NAME")]
KeyOpt = Annotated[str, option("--key", "The indexed key column.", IN, metavar="COLUMN")]
LogOpt = Annotated[
    str | None,
    option("--log", "Lookup log: a table in the database, or a .parquet/.csv file.", IN, metavar="TABLE|FILE"),
]
LogSqlOpt = Annotated[
    Path | None,
    option(
        "--log-sql",
        "A file with a query whose result is the lookup log, run read-only (see workloads/).",
        IN,
        metavar="FILE",
    ),
]
LogColumnOpt = Annotated[
    str | None,
    option("--log-column", "Looked-up value column in the log (default: the key's name).", IN, metavar="COLUMN"),
]
CountColumnOpt = Annotated[
    str | None,
    option("--count-column", "Log column with a lookup count per row (pre-aggregated log).", IN, metavar="COLUMN"),
]
DistinctOpt = Annotated[
    bool, option("--distinct-keys", "Accept a key column with repeated values: one entry per distinct value.", IN)
]
MemoryOpt = Annotated[
    str | None,
    option(
        "--memory-limit",
        "Cap DuckDB's memory while reading the log, e.g. 2GB (it spills to disk beyond).",
        IN,
        metavar="SIZE",
    ),
]
PageSizeOpt = Annotated[
    list[int] | None,
    option("--page-size", "Page size in bytes (repeatable; default 4096, 8192, 16384).", GEO, metavar="BYTES"),
]
KppOpt = Annotated[
    list[int] | None,
    option("--keys-per-page", "Capacity c in keys per page, instead of a page size (repeatable).", GEO, metavar="C"),
]
HeaderOpt = Annotated[int, option("--page-header", "Bytes per page kept for the header.", GEO, metavar="BYTES")]
RecordOpt = Annotated[int, option("--record-pointer", "Bytes per record pointer.", GEO, metavar="BYTES")]
ChildOpt = Annotated[int, option("--child-pointer", "Bytes per child-page pointer.", GEO, metavar="BYTES")]
KeyBytesOpt = Annotated[
    float | None,
    option("--key-bytes", "Bytes per key (default: from the column type or measured).", GEO, metavar="BYTES"),
]
ModelOpt = Annotated[
    str,
    option(
        "--model",
        "Index structure: btree (keys in every page), bplus (keys only in leaves), both side by side, "
        "or parquet (row groups of a key-sorted Parquet file).",
        GEO,
        metavar="btree|bplus|both|parquet",
    ),
]
FanoutOpt = Annotated[
    int | None,
    option(
        "--fanout",
        "bplus: children per internal page, with --keys-per-page (which then sets the leaf capacity).",
        GEO,
        min=2,
        metavar="F",
    ),
]
FillOpt = Annotated[
    float,
    option(
        "--fill-factor",
        "Share of each leaf page a bulk loader fills (0..1] in the even split, the baseline (the advice may fill pages).",
        GEO,
        metavar="SHARE",
    ),
]
InternalFillOpt = Annotated[
    float | None,
    option(
        "--internal-fill",
        "Share of each internal page the bulk loader fills (0..1] (default: the --fill-factor).",
        GEO,
        metavar="SHARE",
    ),
]
TruncateOpt = Annotated[
    bool,
    option(
        "--truncate-separators",
        "bplus, string keys: shorten separators to the shortest prefix that still separates two leaves.",
        GEO,
    ),
]
MaxPagesOpt = Annotated[
    str,
    option(
        "--max-pages",
        "Most pages a layout may use: even (the even split's count), a ratio such as 1.25x, a page count, or none.",
        BUD,
        metavar="SPEC",
    ),
]
MaxHeightOpt = Annotated[
    str, option("--max-height", "Most levels a layout may have: even, even+K, a number, or none.", BUD, metavar="SPEC")
]
FrontierOpt = Annotated[
    bool,
    option("--frontier/--no-frontier", "Also plan each page size at 1.1x to 2x the pages and with no page limit.", BUD),
]
CurrentOpt = Annotated[
    str | None,
    option(
        "--current",
        "Your existing index to cost beside the plans: sqlite:PATH:INDEX (an SQLite file, opened read-only).",
        IN,
        metavar="sqlite:PATH:INDEX",
    ),
]
JsonOpt = Annotated[bool, option("--json", "Print one JSON object on stdout instead of the report.", OUT)]
ExportOpt = Annotated[
    Path | None,
    option(
        "--export", "Write the recommended pages and their keys (.csv, .json, .parquet, .duckdb).", OUT, metavar="FILE"
    ),
]
ExportForOpt = Annotated[
    int | None,
    option("--export-for", "Export only the plan for this page size (or keys per page).", OUT, metavar="SIZE"),
]
ExportLayoutOpt = Annotated[
    str,
    option(
        "--export-layout",
        "Which layout --export writes: advised, even, or balanced (B+: every leaf at one depth).",
        OUT,
        metavar="advised|even|balanced",
    ),
]
ForceOpt = Annotated[bool, option("--force", "Replace an existing output file.", OUT)]
SvgOpt = Annotated[Path | None, option("--svg", "Also save the whole report as an SVG picture.", OUT, metavar="FILE")]
HtmlOpt = Annotated[Path | None, option("--html", "Also save the whole report as an HTML page.", OUT, metavar="FILE")]
PoolOpt = Annotated[
    list[int] | None,
    option(
        "--pool-pages",
        "Buffer pool size in pages (repeatable; default 0.1% to 10% of the index).",
        WL,
        min=1,
        metavar="PAGES",
    ),
]
OrderOpt = Annotated[
    str | None,
    option(
        "--order-column",
        "Log column giving lookup order (time or sequence): enables the LRU replay.",
        WL,
        metavar="COLUMN",
    ),
]
ReplayOpt = Annotated[
    int, option("--replay-limit", "Replay at most this many lookups (the earliest).", WL, min=1, metavar="N")
]
StorageOpt = Annotated[
    str,
    option(
        "--storage",
        "Storage profile for the page-size choice: nvme, sata-ssd, network-disk, hdd, or LATENCY_US,MB_PER_S.",
        WL,
        metavar="PROFILE",
    ),
]
PoolBytesOpt = Annotated[
    int | None,
    option(
        "--pool-bytes",
        "Buffer pool bytes for the page-size choice (default: 1% of the index).",
        WL,
        min=1,
        metavar="BYTES",
    ),
]
HoldoutOpt = Annotated[
    float,
    option(
        "--holdout",
        "With --order-column: share of the latest lookups held out to judge a plan fitted on the rest (0: off).",
        WL,
        min=0.0,
        max=0.9,
        metavar="SHARE",
    ),
]
ScanOpt = Annotated[
    str | None,
    option(
        "--scan-to",
        "Log column with a range scan's upper bound; rows where it is set scan from the looked-up value to it.",
        WL,
        metavar="COLUMN",
    ),
]
SmoothOpt = Annotated[
    float,
    option(
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
    option(
        "--exact-seconds",
        "Run the exact optimiser when it should finish within this many seconds per page size.",
        SOLVE,
        min=0.0,
        metavar="SECONDS",
    ),
]

# Parquet row groups (--model parquet)
PQ = "Parquet row groups (--model parquet)"
ColumnsOpt = Annotated[
    str | None,
    option("--columns", "Columns a lookup returns, comma-separated (default: every column).", PQ, metavar="A,B"),
]
FooterCachedOpt = Annotated[
    bool, option("--footer-cached", "The reader keeps the file's metadata between queries (no footer read).", PQ)
]
RowGroupRowsOpt = Annotated[
    int,
    option(
        "--row-group-rows",
        "Rows per group of the even file (DuckDB's default 122880; set your writer's).",
        PQ,
        min=1,
        metavar="N",
    ),
]
MaxRowGroupsOpt = Annotated[
    str,
    option(
        "--max-row-groups",
        "Most row groups of the advised file: even (as many as the even file), a ratio such as 1.5x, a count, or none.",
        PQ,
        metavar="SPEC",
    ),
]
MinGroupRowsOpt = Annotated[
    int, option("--min-group-rows", "Fewest rows in any advised row group.", PQ, min=1, metavar="N")
]
