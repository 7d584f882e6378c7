"""Small formatting helpers shared by the report's sections (no figures are computed here)."""

from __future__ import annotations

from rich.text import Text

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
