"""Rich renderables for a run; drawn from the same dict that ``--json`` prints.

Rendering from the serialised dict keeps the terminal report and the JSON in step: anything
the report shows, a script can read.
"""

from __future__ import annotations

from rich.console import Group
from rich.panel import Panel
from rich.table import Table
from rich.text import Text

FOOTER = (
    "This is advice about storage layouts, computed from the workload you supplied. "
    "Test any layout on a copy of your data before production use."
)


def _c(p: dict) -> str:
    """Capacity label of a plan or row: keys per page, marked B+ for a B+-tree (keys per leaf)."""
    return f"{p['keys_per_page']} B+" if p.get("model") == "bplus" else str(p["keys_per_page"])


def _pct(x: float) -> str:
    return f"{100 * x:.1f}%"


def _num(x: float) -> str:
    return f"{x:,.0f}" if float(x).is_integer() else f"{x:,.2f}"


def inputs_panel(run: dict) -> Panel:
    t = Table.grid(padding=(0, 2))
    t.add_column(style="bold")
    t.add_column()
    for k, v in run["inputs"].items():
        if v not in (None, "", []):
            t.add_row(k.replace("_", " "), str(v))
    return Panel(t, title="What was read", title_align="left")


def traffic_panel(run: dict) -> Panel:
    h = run["histogram"]
    t = Table.grid(padding=(0, 2))
    t.add_column(style="bold")
    t.add_column(justify="right")
    t.add_row("distinct keys", f"{run['keys']:,}")
    t.add_row("lookups", _num(run["lookups"]))
    t.add_row("  found (hits)", f"{_num(run['hits'])}  ({_pct(h['hit_share'])})")
    t.add_row("  not found (misses)", f"{_num(run['misses'])}  ({_pct(h['miss_share'])})")
    t.add_row("  of NULL (no page read)", f"{_num(run['null_lookups'])}  ({_pct(h['null_share'])})")
    t.add_row("keys never looked up", f"{h['keys_never_hit']:,}")
    t.add_row("hits on the hottest 1% of keys", _pct(h["top_1pct_share"]))
    t.add_row("hits on the hottest 10% of keys", _pct(h["top_10pct_share"]))
    t.add_row("entropy of lookups", f"{h['entropy_bits']:.2f} bits")
    return Panel(t, title="Traffic profile", title_align="left")


def _pair(even: float, advised: float, fmt: str) -> tuple[str, str]:
    """Both figures of a comparison, the better one (fewer reads or misses) in bold; a tie bolds
    neither, so bold never marks a layout that loses."""
    e, a = format(even, fmt), format(advised, fmt)
    if advised < even - 1e-12:
        return e, f"[bold]{a}[/bold]"
    if even < advised - 1e-12:
        return f"[bold]{e}[/bold]", a
    return e, a


def _size(nbytes) -> str:
    if nbytes is None:
        return "-"
    for unit, scale in (("T", 2**40), ("G", 2**30), ("M", 2**20), ("K", 2**10)):
        if nbytes >= scale:
            v = nbytes / scale
            return f"{v:,.0f}{unit}" if v >= 100 else f"{v:.1f}{unit}"
    return f"{nbytes:,}B"


def plans_table(run: dict) -> Table:
    models = {p.get("model") for p in run["plans"]}
    what = {frozenset({"bplus"}): "B+-tree, c = keys per leaf", frozenset({"btree"}): "c = keys per page"}.get(
        frozenset(models), "c = keys per page; c B+ = keys per leaf of a B+-tree"
    )
    t = Table(title=f"Page reads per lookup: even split vs advised layout ({what})", title_justify="left")
    for name in ("page bytes", "c", "even split", "advised", "saved", "lower bound", "gap", "optimal"):
        t.add_column(name, justify="left" if name == "optimal" else "right")
    for p in run["plans"]:
        o, u = p["optimized"], p["uniform"]
        even, advised = _pair(u["expected_page_reads"], o["expected_page_reads"], ".3f")
        t.add_row(
            f"{p['page_size']:,}" if p["page_size"] else "-",
            _c(p),
            even,
            advised,
            _pct(p["saving"]),
            f"{p['lower_bound']:.3f}",
            _pct(p["certified_gap"]),
            "proven" if p["proven_optimal"] else "bounded",
        )
    t.caption = (
        "gap = (advised - lower bound) / lower bound: the advised layout is at most this far above the best "
        "layout within the budget. optimal: proven, or bounded (no proof of optimality; the gap bounds it)"
    )
    t.caption_justify = "left"
    return t


def size_table(run: dict) -> Table:
    """What each layout costs on disk and in the worst case, beside the budget it was held to."""
    t = Table(title="Size and worst case, even split → advised", title_justify="left")
    for name in ("c", "pages", "≤ pages", "size", "fill", "levels", "p99", "worst"):
        t.add_column(name, justify="right", no_wrap=True)
    for p in run["plans"]:
        o, u, b = p["optimized"], p["uniform"], p.get("budget") or {}
        t.add_row(
            _c(p),
            f"{u['pages']:,}→{o['pages']:,}",
            "any" if b.get("max_pages") is None else f"{b['max_pages']:,}",
            f"{_size(u.get('bytes'))}→{_size(o.get('bytes'))}" if u.get("bytes") else "-",
            f"{100 * u.get('mean_fill', 0):.0f}→{100 * o.get('mean_fill', 0):.0f}%",
            f"{u['height']}→{o['height']} ≤" + ("any" if b.get("max_height") is None else str(b["max_height"])),
            f"{u['p99_page_reads']}→{o['p99_page_reads']}",
            f"{u['max_page_reads']}→{o['max_page_reads']}",
        )
    t.caption = (
        "≤: the budget the advised layout was held to (--max-pages, --max-height; default: "
        "the even split's own). size: K/M/G = 2^10/2^20/2^30 bytes. p99, worst: page reads of the 99th-"
        "percentile and of the costliest lookup"
    )
    t.caption_justify = "left"
    return t


def frontier_table(run: dict) -> Table | None:
    """Reads against space: the same plan at growing page budgets."""
    plans = [p for p in run["plans"] if p.get("frontier")]
    if not plans:
        return None
    t = Table(
        title="What more space buys: the advised layout at growing page budgets (same height limit)",
        title_justify="left",
    )
    for name in ("c", "≤ pages", "pages", "size", "reads", "saved", "worst", "bound", ""):
        t.add_column(name, justify="left" if name == "" else "right", no_wrap=True)
    for p in plans:
        rows = p["frontier"]
        even_reads = p["uniform"]["expected_page_reads"]
        for i, r in enumerate(rows):
            label = r["max_pages_rule"]
            t.add_row(
                _c(p) if i == 0 else "",
                label,
                f"{r['pages']:,}",
                _size(r.get("bytes")),
                f"{r['expected_page_reads']:.3f}",
                _pct(r["saving"]),
                str(r["max_page_reads"]),
                f"{r['lower_bound']:.3f}",
                _bar(r["expected_page_reads"], even_reads, "cyan", FRONTIER_BAR),
                end_section=i == len(rows) - 1,
            )
    t.caption = (
        "≤ pages: even = the even split's page count, 1.1x = 10% more, none = no page limit; the height "
        "limit stays. bar: reads per lookup, the even split's a full bar. bound: proven lower bound"
    )
    t.caption_justify = "left"
    return t


DEPTH_COLUMNS = 6  # depths shown one by one; deeper ones are summed into one "7+" column


def depth_table(run: dict) -> Table:
    """Share of lookups answered at each depth, even split vs recommended, per plan."""
    depth = max(
        (max(len(p["optimized"]["answered_at_depth"]), len(p["uniform"]["answered_at_depth"])) for p in run["plans"]),
        default=0,
    )
    shown = min(depth, DEPTH_COLUMNS)
    t = Table(title="Where lookups end: share answered at each depth, even split → advised", title_justify="left")
    t.add_column("c", justify="right")
    for d in range(1, shown + 1):
        t.add_column(f"depth {d}", justify="right")
    if depth > DEPTH_COLUMNS:
        t.add_column(f"{DEPTH_COLUMNS + 1}+", justify="right")
    for p in run["plans"]:
        o, u = p["optimized"]["answered_at_depth"], p["uniform"]["answered_at_depth"]
        cells = []
        for d in range(shown):
            a = u[d] if d < len(u) else 0.0
            b = o[d] if d < len(o) else 0.0
            cells.append(f"{_pct(a)}→{_pct(b)}")
        if depth > DEPTH_COLUMNS:
            cells.append(f"{_pct(sum(u[DEPTH_COLUMNS:]))}→{_pct(sum(o[DEPTH_COLUMNS:]))}")
        t.add_row(_c(p), *cells)
    return t


def pool_table(run: dict) -> Table | None:
    """Page misses per lookup for each buffer-pool size, even split vs advised layout."""
    if not run["plans"] or "buffer_pool" not in run["plans"][0]:
        return None
    lru = "uniform_lru" in run["plans"][0]["buffer_pool"][0] if run["plans"][0]["buffer_pool"] else False
    t = Table(title="Buffer pool: page misses per lookup (pinned = the B most-read pages kept)", title_justify="left")
    for name in ("c", "pool pages", "% of index", "pinned even", "pinned advised") + (
        ("LRU even", "LRU advised") if lru else ()
    ):
        t.add_column(name, justify="right")
    for p in run["plans"]:
        for i, row in enumerate(p["buffer_pool"]):
            cells = [
                _c(p) if i == 0 else "",
                f"{row['pool_pages']:,}",
                _pct(row["share_of_index"]),
                *_pair(row["uniform_pinned"], row["optimized_pinned"], ".3f"),
            ]
            if lru:
                cells += [*_pair(row["uniform_lru"], row["optimized_lru"], ".3f")]
            t.add_row(*cells, end_section=i == len(p["buffer_pool"]) - 1)
    t.caption = "% of index: pool size as a share of the even split's pages" + (
        "; LRU: the log replayed in order, cold start" if lru else ""
    )
    t.caption_justify = "left"
    return t


def page_size_panel(run: dict) -> Table | None:
    ch = run.get("page_size_choice")
    if not ch:
        return None
    pr = ch["profile"]
    t = Table(
        title=f"Page size choice on {pr['name']} storage ({pr['latency_us']:g} µs per read + "
        f"{pr['bandwidth_mb_s']:g} MB/s; a rough common-practice profile)",
        title_justify="left",
    )
    for name in (
        "page bytes",
        "µs per read",
        "even µs",
        "advised µs",
        "pool pages",
        "even µs, pool",
        "advised µs, pool",
    ):
        t.add_column(name, justify="right")
    for r in ch["rows"]:

        def mark(key: str, r=r) -> str:
            return (
                " ◀" if (r["page_size"], r.get("model")) == (ch[f"best_page_size{key}"], ch[f"best_model{key}"]) else ""
            )

        label = f"{r['page_size']:,}" + (" B+" if r.get("model") == "bplus" else "")
        t.add_row(
            label,
            f"{r['read_us']:.1f}",
            f"{r['uniform_us']:.1f}",
            f"[bold]{r['optimized_us']:.1f}[/bold]{mark('')}",
            f"{r['pool_pages']:,}",
            f"{r['uniform_with_pool_us']:.1f}",
            f"[bold]{r['optimized_with_pool_us']:.1f}[/bold]{mark('_with_pool')}",
        )
    t.caption = (
        f"time per lookup = page reads × (latency + page size / bandwidth); pool: {ch['pool_bytes']:,} bytes "
        f"pinned with the most-read pages; ◀ = fastest"
    )
    t.caption_justify = "left"
    return t


def balanced_table(run: dict) -> Table | None:
    if not any("balanced" in p for p in run["plans"]):
        return None
    t = Table(
        title="Balanced B+-tree (all leaves at one depth): page misses per lookup, pinned pool", title_justify="left"
    )
    for name in ("c", "pool pages", "even split", "balanced", "lower bound", "how"):
        t.add_column(name, justify="left" if name == "how" else "right")
    for p in (p for p in run["plans"] if "balanced" in p):
        bal = p["balanced"]
        for i, r in enumerate(bal["buffer_pool"]):
            t.add_row(
                _c(p) if i == 0 else "",
                f"{r['pool_pages']:,}",
                *_pair(r["uniform_pinned"], r["balanced_pinned"], ".3f"),
                f"{r['lower_bound']:.3f}",
                bal["method"] if i == 0 else "",
                end_section=i == len(bal["buffer_pool"]) - 1,
            )
    t.caption = (
        "every lookup reads the full height in both; only the cache benefits. Exact for tiny indexes, "
        "else near-optimal; lower bound: no balanced tree of this height can miss less"
    )
    t.caption_justify = "left"
    return t


def scans_table(run: dict) -> Table | None:
    if not run["plans"] or "range_scans" not in run["plans"][0]:
        return None
    s0 = run["plans"][0]["range_scans"]
    t = Table(
        title=f"Point lookups and range scans ({_num(s0['point_lookups'])} lookups, {_num(s0['scans'])} scans)",
        title_justify="left",
    )
    for name in (
        "c",
        "lookup reads even",
        "advised",
        "pages per scan even",
        "advised",
        "all operations even",
        "advised",
    ):
        t.add_column(name, justify="right")
    for p in run["plans"]:
        s = p["range_scans"]
        u, o = s["uniform"], s["optimized"]
        t.add_row(
            _c(p),
            *_pair(u["point_lookup_reads"], o["point_lookup_reads"], ".3f"),
            *_pair(u["scan_pages"], o["scan_pages"], ".2f"),
            *_pair(u["combined"], o["combined"], ".3f"),
        )
    t.caption = (
        "A scan reads every page holding a key in its range and every ancestor of those pages, each once. "
        "The optimiser counts each scan's first probe as a lookup; it does not pack ranges into fewer pages."
    )
    t.caption_justify = "left"
    return t


def holdout_table(run: dict) -> Table | None:
    h = run.get("holdout")
    if not h:
        return None
    t = Table(
        title=f"Held-out check: fitted on the earliest {100 * (1 - h['fraction']):.0f}% of the log, "
        f"judged on the latest {100 * h['fraction']:.0f}%",
        title_justify="left",
    )
    for name in (
        "c",
        "smoothing",
        "fit: even",
        "fit: advised",
        "fit: saved",
        "later: even",
        "later: advised",
        "later: saved",
    ):
        t.add_column(name, justify="right")
    for r in h["rows"]:
        i, o = r["in_sample"], r["held_out"]
        t.add_row(
            _c(r),
            f"{r['smoothing']:g}",
            f"{i['uniform']:.3f}",
            f"{i['optimized']:.3f}",
            _pct(i["saving"]),
            f"{o['uniform']:.3f}",
            f"{o['optimized']:.3f}",
            f"[bold]{_pct(o['saving'])}[/bold]",
        )
    t.caption = "page reads per lookup; a large drop from fit to later savings means the plan overfits its sample"
    t.caption_justify = "left"
    return t


BAR_WIDTH = 16
FRONTIER_BAR = 10


def _bar(value: float, top: float, style: str, width: int = BAR_WIDTH) -> Text:
    """A horizontal bar of block characters, value scaled to ``top`` over ``width`` cells."""
    cells = 0.0 if top <= 0 else width * min(value, top) / top
    full = int(cells)
    part = " ▏▎▍▌▋▊▉"[int((cells - full) * 8)] if full < width else ""
    return Text("█" * full + part.strip(), style=style)


def charts(run: dict) -> Table | None:
    """Bars: share of lookups answered at each depth, and misses per lookup against pool size."""
    if not run["plans"]:
        return None
    t = Table(
        title="Bars: share answered at each depth; page misses per lookup by pool size (pinned)",
        title_justify="left",
        show_lines=False,
    )
    t.add_column("c", justify="right")
    t.add_column("depth / pool pages", justify="left", no_wrap=True)
    t.add_column("even split", justify="left", no_wrap=True)
    t.add_column("advised", justify="left", no_wrap=True)
    for p in run["plans"]:
        first = True
        u, o = p["uniform"]["answered_at_depth"], p["optimized"]["answered_at_depth"]
        for d in range(max(len(u), len(o))):
            a, b = (u[d] if d < len(u) else 0.0), (o[d] if d < len(o) else 0.0)
            t.add_row(
                _c(p) if first else "",
                f"depth {d + 1}",
                _bar(a, 1.0, "grey58") + Text(f" {_pct(a)}"),
                _bar(b, 1.0, "green") + Text(f" {_pct(b)}"),
            )
            first = False
        rows = p.get("buffer_pool", [])
        top = max([r["uniform_pinned"] for r in rows] + [r["optimized_pinned"] for r in rows] + [1e-12])
        for i, r in enumerate(rows):
            a, b = r["uniform_pinned"], r["optimized_pinned"]
            t.add_row(
                "",
                f"pool {r['pool_pages']:,}",
                _bar(a, top, "grey58") + Text(f" {a:.3f}"),
                _bar(b, top, "green") + Text(f" {b:.3f}"),
                end_section=i == len(rows) - 1,
            )
    return t


BOUND_NAMES = {
    "entropy": "entropy",
    "level_capacity": "keys per level",
    "root_runs": "hot keys side by side",
    "leaf_runs": "leaves as key runs",
    "within_budget": "price per page (within the budget)",
}


def method_notes(run: dict) -> Text:
    lines = []
    for p in run["plans"]:
        g = p["geometry"]
        if p.get("model") == "bplus":
            cap = _bplus_formula(g) if g else f"{p['keys_per_page']} keys per leaf, fanout {p['fanout']} (given)"
        else:
            cap = f"keys/page = {g and _formula(g) or str(p['keys_per_page']) + ' (given)'}"
        lines.append(
            f"c={p['keys_per_page']}: {cap}; method: {p['optimized']['method']}; "
            f"bounds: " + ", ".join(f"{BOUND_NAMES.get(k, k)} {v:.3f}" for k, v in p["lower_bounds"].items())
        )
    if any(p.get("model") == "bplus" for p in run["plans"]):
        lines.append(
            "Cost model (B+-tree, leaves at any depth): every lookup reads the pages from the root to the leaf "
            "covering it; a value between two leaves goes to the left one."
        )
    if any(p.get("model") != "bplus" for p in run["plans"]):
        lines.append(
            "Cost model: a hit reads every page from the root to the page holding the key; a miss reads "
            "pages until it meets an empty child slot."
        )
    return Text("\n".join(lines), style="dim")


def _bplus_formula(g: dict) -> str:
    sep = g["separator_bytes"] if g.get("separator_bytes") is not None else g["key_bytes"]
    text = (
        f"B+-tree leaves: floor(({g['page_size']} - {g['page_header']}) x {g['fill_factor']:g} / "
        f"({g['key_bytes']:g} key + "
        f"{g['record_pointer']} record ptr)) = {g['leaf_capacity']} keys; internal: floor(({g['page_size']} - "
        f"{g['page_header']} + {sep:g}) / ({sep:g} separator + {g['child_pointer']})) = {g['fanout']} children"
    )
    if g.get("separator_bytes") is not None:
        text += (
            f" (suffix truncation: separators {sep:.1f} bytes instead of {g['key_bytes']:g}, "
            f"fanout {g['untruncated_fanout']} -> {g['fanout']})"
        )
    return text


def _formula(g: dict) -> str:
    return (
        f"floor(({g['page_size']} - {g['page_header']} header) / ({g['key_bytes']:g} key + "
        f"{g['record_pointer']} record ptr + {g['child_pointer']} child ptr)) = {g['keys_per_page']}"
    )


def export_text(run: dict) -> Text | None:
    if not run["exports"]:
        return None
    return Text("Separator keys written to: " + ", ".join(run["exports"]), style="green")


def render_run(run: dict) -> Group:
    """The whole report as one renderable."""
    parts = [inputs_panel(run), traffic_panel(run)]
    if run["keys"] == 0:
        parts.append(Text("The table has no keys: there is no index to lay out."))
    elif run["lookups"] - run["null_lookups"] <= 0:
        parts.append(
            Text(
                "The log holds no lookups of non-NULL values: nothing to optimise; the even split is shown as is.",
                style="yellow",
            )
        )
    if run["plans"]:
        parts += [plans_table(run), size_table(run), depth_table(run)]
        # optional sections: each returns None when the run holds none of its figures
        for section in (
            frontier_table,
            pool_table,
            balanced_table,
            scans_table,
            holdout_table,
            page_size_panel,
            charts,
        ):
            table = section(run)
            if table is not None:
                parts.append(table)
        parts.append(method_notes(run))
    e = export_text(run)
    if e is not None:
        parts.append(e)
    parts.append(Panel(Text(FOOTER), style="yellow"))
    return Group(*parts)


def render_probe(res: dict, path: str) -> Group:
    """The probe's figures: counted page reads beside the model's prediction for the same log."""
    t = Table(title=f"Replay of the log against {path}", title_justify="left")
    t.add_column("figure")
    t.add_column("value", justify="right")
    rows = [
        ("lookups replayed", f"{res['lookups']:,}"),
        ("found / not found", f"{res['found']:,} / {res['not_found']:,}"),
        ("page reads per lookup, counted", f"{res['page_reads_per_lookup']:.4f}"),
        ("page reads per lookup, predicted by the model", f"{res['predicted_page_reads_per_lookup']:.4f}"),
        ("microseconds per lookup (wall, this process)", f"{res['microseconds_per_lookup']:.1f}"),
        ("operating-system cache dropped first", "yes" if res["cold"] else "no"),
    ]
    if res.get("pool_misses_per_lookup") is not None:
        rows.append(
            (f"pool misses per lookup (LRU, {res['pool_pages']:,} pages)", f"{res['pool_misses_per_lookup']:.4f}")
        )
    rows.append(("found keys with a wrong row number", f"{res['wrong_rows']:,}"))
    for a, b in rows:
        t.add_row(a, b)
    return Group(t, Panel(Text(FOOTER), style="yellow"))
