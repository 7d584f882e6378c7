"""Rich renderables for a run; drawn from the same dict that ``--json`` prints.

Rendering from the serialised dict keeps the terminal report and the JSON in step: anything
the report shows, a script can read.
"""

from __future__ import annotations

from rich.console import Group
from rich.panel import Panel
from rich.table import Table
from rich.text import Text

from .report_current import current_table
from .report_format import BAR_WIDTH, FOOTER, FRONTIER_BAR, Fitted, bar, cap_label, num, pair, pct, size_text
from .report_sections import (
    balanced_table,
    charts,
    holdout_table,
    method_notes,
    page_size_panel,
    pool_table,
    scans_table,
)


def inputs_panel(run: dict) -> Panel:
    t = Table.grid(padding=(0, 2))
    t.add_column(style="bold")
    t.add_column(overflow="fold")  # a long path folds onto the next line, never cut
    for k, v in run["inputs"].items():
        if v not in (None, "", []):
            text = f"{v:,}" if isinstance(v, int) and not isinstance(v, bool) else str(v)
            t.add_row(k.replace("_", " "), text)
    return Panel(t, title="What was read", title_align="left")


def traffic_panel(run: dict) -> Panel:
    h = run["histogram"]
    t = Table.grid(padding=(0, 2))
    t.add_column(style="bold")
    t.add_column(justify="right")
    t.add_row("distinct keys", f"{run['keys']:,}")
    t.add_row("lookups", num(run["lookups"]))
    t.add_row("  found (hits)", f"{num(run['hits'])}  ({pct(h['hit_share'])})")
    t.add_row("  not found (misses)", f"{num(run['misses'])}  ({pct(h['miss_share'])})")
    t.add_row("  of NULL (no page read)", f"{num(run['null_lookups'])}  ({pct(h['null_share'])})")
    t.add_row("keys never looked up", f"{h['keys_never_hit']:,}")
    t.add_row("hits on the hottest 1% of keys", pct(h["top_1pct_share"]))
    t.add_row("hits on the hottest 10% of keys", pct(h["top_10pct_share"]))
    t.add_row("entropy of lookups", f"{h['entropy_bits']:.2f} bits")
    return Panel(t, title="Traffic profile", title_align="left")


def _optimal(run: dict, p: dict) -> str:
    """How close to the best: "proven" only when some lookup found a key (all-miss logs prove nothing useful)."""
    if not run.get("hits"):
        return "no hits"
    return "proven" if p["proven_optimal"] else f"within {pct(p['certified_gap'])}"


def summary_text(run: dict) -> Group:
    """The advice per page size and structure (written by :mod:`advisor.headline`): what it saves,
    then where it can be built and what the cache does to it, each with a hanging indent."""
    parts = []
    for item in run["advice"]:
        parts.append(Text(item.get("saves", item["text"])))
        if "saves" not in item:
            continue
        grid = Table.grid(padding=(0, 1))
        grid.add_column(no_wrap=True, style="dim")
        grid.add_column()
        rows = [("  build:", item["build_in"] + "."), ("  cache:", item["cache"] + ".")]
        for label, text in reversed(rows) if item["fits_in_pool"] else rows:
            grid.add_row(label, text)
        parts.append(grid)
    return Group(*parts)


def plans_table(run: dict) -> Table:
    models = {p.get("model") for p in run["plans"]}
    what = {frozenset({"bplus"}): "B+-tree, c = keys per leaf", frozenset({"btree"}): "c = keys per page"}.get(
        frozenset(models), "c = keys per page; c B+ = keys per leaf of a B+-tree"
    )
    t = Table(title=f"Page reads per lookup: even split vs advised layout ({what})", title_justify="left")
    for name in ("page bytes", "c", "even split", "advised", "saved", "lower bound", "gap", "optimal"):
        t.add_column(name, justify="left" if name == "optimal" else "right", no_wrap=name == "optimal")
    for p in run["plans"]:
        o, u = p["optimized"], p["uniform"]
        even, advised = pair(u["expected_page_reads"], o["expected_page_reads"], ".3f")
        t.add_row(
            f"{p['page_size']:,}" if p["page_size"] else "-",
            cap_label(p),
            even,
            advised,
            pct(p["saving"]),
            f"{p['lower_bound']:.3f}",
            pct(p["certified_gap"]),
            _optimal(run, p),
        )
    t.caption = (
        "gap = (advised - lower bound) / lower bound: the advised layout is at most this far above the best "
        "layout within the budget (proven bound). optimal: proven, or within the gap of the best possible"
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
            cap_label(p),
            f"{u['pages']:,}→{o['pages']:,}",
            "any" if b.get("max_pages") is None else f"{b['max_pages']:,}",
            f"{size_text(u.get('bytes'))}→{size_text(o.get('bytes'))}" if u.get("bytes") else "-",
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
                cap_label(p) if i == 0 else "",
                label,
                f"{r['pages']:,}",
                size_text(r.get("bytes")),
                f"{r['expected_page_reads']:.3f}",
                pct(r["saving"]),
                str(r["max_page_reads"]),
                f"{r['lower_bound']:.3f}",
                bar(r["expected_page_reads"], even_reads, "cyan", FRONTIER_BAR),
                end_section=i == len(rows) - 1,
            )
    t.caption = (
        "≤ pages: even = the even split's page count, 1.1x = 10% more, none = no page limit; the height "
        "limit stays. bar: reads per lookup, the even split's a full bar. bound: proven lower bound"
    )
    t.caption_justify = "left"
    return t


DEPTH_COLUMNS = 6  # depths shown one by one; deeper ones are summed into one "7+" row


def depth_table(run: dict) -> Table:
    """Share of lookups answered at each depth (rows), even split -> advised, per plan (columns);
    depths past the sixth are summed into one "7+" row, so no tree is too deep to show."""
    depth = max(
        (max(len(p["optimized"]["answered_at_depth"]), len(p["uniform"]["answered_at_depth"])) for p in run["plans"]),
        default=0,
    )
    t = Table(title="Where lookups end: share answered at each depth, even split → advised", title_justify="left")
    t.add_column("depth", justify="right")
    for p in run["plans"]:
        label = f"{p['page_size']:,} B" if p["page_size"] else f"c = {cap_label(p)}"
        t.add_column(label + (" B+" if p["page_size"] and p.get("model") == "bplus" else ""), justify="right")
    rows = [(str(d + 1), d, d + 1) for d in range(min(depth, DEPTH_COLUMNS))]
    if depth > DEPTH_COLUMNS:
        rows.append((f"{DEPTH_COLUMNS + 1}+", DEPTH_COLUMNS, depth))
    for label, lo, hi in rows:
        cells = []
        for p in run["plans"]:
            u, o = p["uniform"]["answered_at_depth"], p["optimized"]["answered_at_depth"]
            cells.append(f"{pct(sum(u[lo:hi]))}→{pct(sum(o[lo:hi]))}")
        t.add_row(label, *cells)
    return t


def export_text(run: dict) -> Text | None:
    if not run["exports"]:
        return None
    return Text("Pages with every key they hold written to: " + ", ".join(run["exports"]), style="green")


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
        parts += [Panel(summary_text(run), title="The advice per page size and structure", title_align="left")]
        parts += [plans_table(run), size_table(run), depth_table(run)]
        # optional sections: each returns None when the run holds none of its figures
        for section in (
            current_table,
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
    return Group(*(Fitted(p) if isinstance(p, Table) else p for p in parts))


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


def render_direct(res: dict) -> Group:
    """Device time of each file, side by side (``probe --direct``)."""
    t = Table(title="Every page read from the device (O_DIRECT), files taking turns", title_justify="left")
    for name in ("file", "reads", "us/lookup", "spread", "us/read"):
        t.add_column(name, justify="left" if name == "file" else "right", overflow="fold")
    for f in res["files"]:
        lo, hi = f["microseconds_per_lookup_spread"]
        t.add_row(
            f["path"],
            f"{f['page_reads_per_lookup']:.3f}",
            f"{f['microseconds_per_lookup']:.1f}",
            f"{lo:.0f}-{hi:.0f}",
            f"{f['microseconds_per_page_read']:.1f}",
        )
    n = res["files"][0]["lookups"] if res["files"] else 0
    t.caption = (
        f"{n:,} lookups in {res['blocks']} blocks. reads: page reads per lookup, counted; spread: microseconds per "
        "lookup over blocks, lowest-highest; us/read: time per page read. A virtual disk may be cached by its host."
    )
    t.caption_justify = "left"
    return Group(t, Panel(Text(FOOTER), style="yellow"))


__all__ = ["BAR_WIDTH", "FOOTER", "render_direct", "render_probe", "render_run"]
