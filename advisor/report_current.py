"""The report's section for the user's existing index (``--current``), beside the plans."""

from __future__ import annotations

from rich.table import Table

from .report_format import cap_label, pct


def current_table(run: dict) -> Table | None:
    """Your index, then the even split and the advice at its page size (all plans if none match)."""
    cur = run.get("current")
    if not cur:
        return None
    same = [p for p in run["plans"] if p["page_size"] == cur["page_size"]] or run["plans"]
    t = Table(
        title=f"Your current index ({cur['source']} index {cur['index']!r}) beside the even split and the advice",
        title_justify="left",
    )
    for name in ("layout", "page bytes", "pages", "levels", "reads per lookup", "vs your index"):
        t.add_column(name, justify="left" if name == "layout" else "right")
    base = cur["expected_page_reads"]
    t.add_row("your index", f"{cur['page_size']:,}", f"{cur['pages']:,}", str(cur["height"]), f"{base:.3f}", "-")
    for p in same:
        for label, lay in (("even split", p["uniform"]), ("advised", p["optimized"])):
            reads = lay["expected_page_reads"]
            if base <= 0:
                change = "-"
            elif reads <= base:
                change = pct((base - reads) / base) + " fewer"
            else:
                change = pct((reads - base) / base) + " more"
            t.add_row(
                f"{label} ({cap_label(p)})",
                f"{p['page_size']:,}" if p["page_size"] else "-",
                f"{lay['pages']:,}",
                str(lay["height"]),
                f"{reads:.3f}",
                change,
            )
    t.caption = (
        "Your index is read from its file and costed as that engine searches: every lookup ends in a leaf "
        f"(were its search to stop at an interior match: {cur['expected_page_reads_stopping_at_interior_match']:.3f}). "
        "The advised figures assume a search that stops at the page holding the key (the files advisor build writes)."
    )
    t.caption_justify = "left"
    return t
