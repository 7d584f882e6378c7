"""The row-group analysis and the probe of a Parquet file, drawn for a terminal (Rich)."""

from __future__ import annotations

from rich.console import Group
from rich.table import Table
from rich.text import Text

DISCLAIMER = "Advice: test any layout on a copy of your data, measured on your engine, before production use."


def _kib(x: float) -> str:
    return f"{x / 1024:,.1f}"


def _table(title: str) -> Table:
    return Table(title=title, title_justify="left", title_style="bold", show_edge=False, pad_edge=False)


def render_plan(run: dict) -> Group:
    plan = run["plans"][0]
    u, o = plan["uniform"], plan["optimized"]
    parts = [Text(item["text"]) for item in run["advice"]]
    head = _table("Workload")
    head.add_column("keys", justify="right")
    head.add_column("rows", justify="right")
    head.add_column("lookups", justify="right")
    head.add_column("hits", justify="right")
    head.add_column("misses", justify="right")
    head.add_column("top 1% keys", justify="right")
    head.add_row(
        f"{run['keys']:,}",
        f"{run['rows']:,}",
        f"{run['lookups']:,.0f}",
        f"{run['hits']:,.0f}",
        f"{run['misses']:,.0f}",
        f"{run['top_1pct_share']:.1%}",
    )
    parts += [Text(""), head]
    t = _table("Per lookup (modelled): even file against advised cut")
    t.add_column("file")
    t.add_column("groups", justify="right")
    t.add_column("KiB read", justify="right")
    t.add_column("rows read", justify="right")
    t.add_column("groups read", justify="right")
    t.add_column("file MiB", justify="right")
    for name, f in (("even", u), ("advised", o)):
        t.add_row(
            name,
            f"{f['row_groups']:,}",
            _kib(f["expected_bytes"]),
            f"{f['rows_per_lookup']:,.0f}",
            f"{f['row_groups_per_lookup']:.3f}",
            f"{f['file_bytes'] / 2**20:,.1f}",
        )
    parts += [Text(""), t]
    bound = (
        "proven optimal under the byte model"
        if plan["proven_optimal"]
        else (f"lower bound {_kib(plan['lower_bound'])} KiB per lookup")
    )
    b = plan["budget"]
    parts.append(
        Text(
            f"Budget: at most {b['max_row_groups']:,} row groups ({b['max_row_groups_rule']}), each of at least "
            f"{b['min_group_rows']:,} rows; {bound}. Advised groups hold {o['smallest_group_rows']:,} to "
            f"{o['largest_group_rows']:,} rows."
        )
    )
    if run.get("frontier"):
        f = _table("What more row groups buy (modelled)")
        f.add_column("budget")
        f.add_column("groups", justify="right")
        f.add_column("KiB read", justify="right")
        f.add_column("x even", justify="right")
        f.add_column("footer KiB", justify="right")
        f.add_column("file MiB", justify="right")
        for p in run["frontier"]:
            f.add_row(
                p["max_row_groups_rule"],
                f"{p['row_groups']:,}",
                _kib(p["expected_bytes"]),
                f"{p['ratio_to_even']:.2f}",
                _kib(p["footer_bytes"]),
                f"{p['file_bytes'] / 2**20:,.1f}",
            )
        parts += [Text(""), f]
    h = run.get("holdout")
    if h and "fit" in h:
        ht = _table(f"Held out: fitted on the earliest {1 - h['held_out_share']:.0%}, judged on the rest")
        ht.add_column("part")
        ht.add_column("even KiB", justify="right")
        ht.add_column("advised KiB", justify="right")
        ht.add_column("saving", justify="right")
        for name, key in (("fit", "fit"), ("later", "held_out")):
            r = h[key]
            ht.add_row(name, _kib(r["uniform"]), _kib(r["optimized"]), f"{r['saving']:.1%}")
        parts += [Text(""), ht]
    m = run["byte_model"]
    parts.append(
        Text(
            f"\nByte model (estimated from {m['sample_rows']:,} sample rows): a lookup reads the footer "
            f"({'kept by the reader' if m['footer_cached'] else 'at least 16 KiB'}) and, in the group holding its "
            f"value, columns {', '.join(m['columns_read'])}: {m['bytes_per_group_read']:,.0f} bytes + "
            f"{m['bytes_per_row']:,.2f} per row. Measure the built file with advisor probe."
        )
    )
    parts.append(Text(DISCLAIMER, style="dim"))
    return Group(*parts)


def render_probe(res: dict, path: str) -> Group:
    t = _table(f"Probe of {path} through DuckDB ({res['lookups']:,} lookups)")
    t.add_column("figure")
    t.add_column("value", justify="right")
    rows = [
        ("found / not found", f"{res['found']:,} / {res['not_found']:,}"),
        ("bytes per lookup, counted", f"{res['bytes_per_lookup']:,.0f}"),
        ("bytes per lookup, predicted", f"{res['predicted_bytes_per_lookup']:,.0f}"),
        ("counted / predicted", f"{res['counted_over_predicted']:.4f}"),
        ("row groups per lookup", f"{res['row_groups_per_lookup']:.3f}"),
        ("read operations per lookup", f"{res['read_operations_per_lookup']:.2f}"),
        ("microseconds per lookup", f"{res['microseconds_per_lookup']:,.0f}"),
        ("wrong rows", f"{res['wrong_rows']:,}"),
    ]
    for a, b in rows:
        t.add_row(a, b)
    note = Text(
        "Counted: DuckDB's own profiler (io.total_bytes_read per query). Predicted: the footer read "
        "plus the column chunks of the groups whose [min, max] holds each value, from the file's metadata."
    )
    return Group(t, note)
