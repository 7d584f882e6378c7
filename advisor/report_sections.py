"""Report sections about the cache, range scans, held-out traffic, the page-size choice, the
bar charts and the method notes; each returns None when the run holds none of its figures."""

from __future__ import annotations

from rich.table import Table
from rich.text import Text

from .report_format import bar, cap_label, num, pair, pct


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
                cap_label(p) if i == 0 else "",
                f"{row['pool_pages']:,}",
                pct(row["share_of_index"]),
                *pair(row["uniform_pinned"], row["optimized_pinned"], ".3f"),
            ]
            if lru:
                cells += [*pair(row["uniform_lru"], row["optimized_lru"], ".3f")]
            t.add_row(*cells, end_section=i == len(p["buffer_pool"]) - 1)
    even_wins = any(
        r["uniform_pinned"] < r["optimized_pinned"] - 1e-12 or (lru and r["uniform_lru"] < r["optimized_lru"] - 1e-12)
        for p in run["plans"]
        for r in p["buffer_pool"]
    )
    t.caption = (
        "% of index: pool size as a share of the even split's pages"
        + ("; LRU: the log replayed in order, cold start" if lru else "")
        + (
            ". Where the even split misses less (bold): a few of its pages carry every lookup, so a small pool "
            "holds them all, while the advised layout spreads the hot keys over more pages near the top"
            if even_wins
            else ""
        )
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
        f"{pr['bandwidth_mb_s']:g} MB/s; "
        + ("your figures)" if pr["name"] == "custom" else "a rough common-practice profile, from memory)"),
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
                cap_label(p) if i == 0 else "",
                f"{r['pool_pages']:,}",
                *pair(r["uniform_pinned"], r["balanced_pinned"], ".3f"),
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
        title=f"Point lookups and range scans ({num(s0['point_lookups'])} lookups, {num(s0['scans'])} scans)",
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
            cap_label(p),
            *pair(u["point_lookup_reads"], o["point_lookup_reads"], ".3f"),
            *pair(u["scan_pages"], o["scan_pages"], ".2f"),
            *pair(u["combined"], o["combined"], ".3f"),
        )
    scans_lose = any(
        p["range_scans"]["optimized"]["scan_pages"] > p["range_scans"]["uniform"]["scan_pages"] + 1e-12
        for p in run["plans"]
    )
    t.caption = (
        "A scan reads every page holding a key in its range and every ancestor of those pages, each once. "
        "The optimiser counts each scan's first probe as a lookup; it does not pack ranges into fewer pages."
        + (
            " Scans read more pages in the advised layout (bold: the even split): lifting hot keys out of "
            "their neighbours' pages spreads a key range over more pages."
            if scans_lose
            else ""
        )
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
            cap_label(r),
            f"{r['smoothing']:g}",
            f"{i['uniform']:.3f}",
            f"{i['optimized']:.3f}",
            pct(i["saving"]),
            f"{o['uniform']:.3f}",
            f"{o['optimized']:.3f}",
            f"[bold]{pct(o['saving'])}[/bold]",
        )
    t.caption = "page reads per lookup; a large drop from fit to later savings means the plan overfits its sample"
    t.caption_justify = "left"
    return t


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
                cap_label(p) if first else "",
                f"depth {d + 1}",
                bar(a, 1.0, "grey58") + Text(f" {pct(a)}"),
                bar(b, 1.0, "green") + Text(f" {pct(b)}"),
            )
            first = False
        rows = p.get("buffer_pool", [])
        top = max([r["uniform_pinned"] for r in rows] + [r["optimized_pinned"] for r in rows] + [1e-12])
        for i, r in enumerate(rows):
            a, b = r["uniform_pinned"], r["optimized_pinned"]
            t.add_row(
                "",
                f"pool {r['pool_pages']:,}",
                bar(a, top, "grey58") + Text(f" {a:.3f}"),
                bar(b, top, "green") + Text(f" {b:.3f}"),
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
    fills = {(f["leaf"], f["internal"]) for f in (p.get("even_fill") for p in run["plans"]) if f}
    for leaf, internal in sorted(fills):
        lines.append(
            f"Even split filled as a bulk loader would: leaves {100 * leaf:.0f}%, internal pages {100 * internal:.0f}% "
            "(--fill-factor, --internal-fill); the advice may fill its pages."
        )
    return Text("\n".join(lines), style="dim")


def _bplus_formula(g: dict) -> str:
    sep = g["separator_bytes"] if g.get("separator_bytes") is not None else g["key_bytes"]
    text = (
        f"B+-tree leaves: floor(({g['page_size']} - {g['page_header']}) / "
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
