"""Small formatting helpers shared by the report's sections (no figures are computed here)."""

from __future__ import annotations

import io

from rich.console import Console, ConsoleOptions, RenderResult
from rich.table import Table
from rich.text import Text

ELLIPSIS = "\u2026"  # what Rich draws where it cuts a cell

FOOTER = (
    "This is advice about storage layouts, computed from the workload you supplied. "
    "Test any layout on a copy of your data before production use."
)


def cap_label(p: dict) -> str:
    """Capacity label of a plan or row: keys per page, marked B+ for a B+-tree (keys per leaf)."""
    return f"{p['keys_per_page']} B+" if p.get("model") == "bplus" else str(p["keys_per_page"])


def pct(x: float) -> str:
    return f"{100 * x:.1f}%"


def num(x: float) -> str:
    return f"{x:,.0f}" if float(x).is_integer() else f"{x:,.2f}"


def pair(even: float, advised: float, fmt: str) -> tuple[str, str]:
    """Both figures of a comparison, the better one (fewer reads or misses) in bold; a tie bolds
    neither, so bold never marks a layout that loses."""
    e, a = format(even, fmt), format(advised, fmt)
    if advised < even - 1e-12:
        return e, f"[bold]{a}[/bold]"
    if even < advised - 1e-12:
        return f"[bold]{e}[/bold]", a
    return e, a


def size_text(nbytes) -> str:
    if nbytes is None:
        return "-"
    for unit, scale in (("T", 2**40), ("G", 2**30), ("M", 2**20), ("K", 2**10)):
        if nbytes >= scale:
            v = nbytes / scale
            return f"{v:,.0f}{unit}" if v >= 100 else f"{v:.1f}{unit}"
    return f"{nbytes:,}B"


BAR_WIDTH = 16
FRONTIER_BAR = 10


def bar(value: float, top: float, style: str, width: int = BAR_WIDTH) -> Text:
    """A horizontal bar of block characters, value scaled to ``top`` over ``width`` cells."""
    cells = 0.0 if top <= 0 else width * min(value, top) / top
    full = int(cells)
    part = " ▏▎▍▌▋▊▉"[int((cells - full) * 8)] if full < width else ""
    return Text("█" * full + part.strip(), style=style)


class Fitted:
    """A table drawn as a table when its cells fit the width, else stacked: one block per row,
    a "header: value" line per cell. Nothing is ever cut to an ellipsis: at 80 columns (a pipe, a
    file) or 60, every number is shown whole."""

    def __init__(self, table: Table) -> None:
        self.table = table

    def fits(self, console: Console, width: int) -> bool:
        """Whether Rich draws the table at ``width`` without cutting a cell or header (drawn once
        off screen and looked at: the one judge of its own column sizing)."""
        probe = Console(width=width, file=io.StringIO(), color_system=None, legacy_windows=False)
        probe.print(self.table)
        return ELLIPSIS not in probe.file.getvalue()

    def __rich_console__(self, console: Console, options: ConsoleOptions) -> RenderResult:
        if self.fits(console, options.max_width):
            yield self.table
            return
        bars = [i for i, col in enumerate(self.table.columns) if not str(col.header).strip()]
        if bars:  # first give up the bar column (a picture of figures shown beside it)
            narrower = Fitted(_without(self.table, bars))
            if narrower.fits(console, options.max_width):
                yield narrower.table
                return
        t = self.table
        if t.title:
            yield Text.from_markup(str(t.title), style="italic") if isinstance(t.title, str) else t.title
        rows = len(t.columns[0]._cells) if t.columns else 0
        for r in range(rows):
            grid = Table.grid(padding=(0, 1))
            grid.add_column(no_wrap=True, style="dim")
            grid.add_column(overflow="fold")
            for col in t.columns:
                cell = col._cells[r]
                text = cell if isinstance(cell, Text) else Text.from_markup(str(cell))
                if text.plain.strip():
                    grid.add_row(f"  {str(col.header) or '·'}:", text)
            yield grid
            if r + 1 < rows:
                yield Text("")
        if t.caption:
            yield Text.from_markup(str(t.caption), style="dim") if isinstance(t.caption, str) else t.caption


def _without(table: Table, drop: list[int]) -> Table:
    """A copy of ``table`` without the columns at ``drop`` (same title, caption and rows)."""
    out = Table(title=table.title, title_justify=table.title_justify, caption=table.caption, box=table.box)
    out.caption_justify = table.caption_justify
    keep = [c for i, c in enumerate(table.columns) if i not in drop]
    for col in keep:
        out.add_column(col.header, justify=col.justify, no_wrap=col.no_wrap, style=col.style)
    rows = len(keep[0]._cells) if keep else 0
    for r in range(rows):
        out.add_row(*(col._cells[r] for col in keep), end_section=table.rows[r].end_section)
    return out
