"""Saved reports (SVG, HTML) in this project's own design: a paper-coloured sheet with a plain
heading and the advice footer, no imitation of any terminal window or desktop."""

from __future__ import annotations

import io
import re
from html import escape
from pathlib import Path

from rich.console import Console
from rich.terminal_theme import TerminalTheme

from .atomic import atomic_path
from .charts import all_charts, chart_sheet

HEADING_PX = 80  # the heading band above the report

# this project's palette: dark ink on warm paper; greens and teals for the advised figures
PAPER = TerminalTheme(
    (250, 247, 240),
    (38, 41, 46),
    [
        (38, 41, 46),
        (170, 57, 43),
        (46, 125, 78),
        (161, 112, 18),
        (42, 90, 140),
        (126, 72, 140),
        (24, 122, 128),
        (120, 120, 112),
    ],
    [
        (88, 92, 98),
        (200, 82, 64),
        (62, 156, 100),
        (190, 140, 40),
        (70, 120, 176),
        (156, 98, 170),
        (40, 150, 156),
        (60, 60, 56),
    ],
)

SVG_PAGE = """<svg viewBox="0 0 {width} {height}" xmlns="http://www.w3.org/2000/svg">
<style>
.{unique_id}-matrix {{ font-family: "DejaVu Sans Mono", Menlo, Consolas, monospace; font-size: {char_height}px;
  line-height: {line_height}px; font-variant-east-asian: full-width; }}
.{unique_id}-heading {{ font-family: Georgia, "Times New Roman", serif; font-size: 20px; fill: #26292e; }}
.{unique_id}-note {{ font-family: Georgia, "Times New Roman", serif; font-size: 13px; fill: #6b675e; }}
{styles}
</style>
<defs>
<clipPath id="{unique_id}-clip-terminal">
<rect x="0" y="0" width="{terminal_width}" height="{terminal_height}" />
</clipPath>
{lines}
</defs>
<rect width="100%" height="100%" fill="#faf7f0" />
<rect x="0" y="0" width="6" height="100%" fill="#2e7d4e" />
<text class="{unique_id}-heading" x="28" y="34">advisor: page-layout advice</text>
<text class="{unique_id}-note" x="28" y="54">
Advice only: test any layout on a copy of your data before production use.</text>
<line x1="28" y1="66" x2="{terminal_width}" y2="66" stroke="#c9c2b2" stroke-width="1" />
<g transform="translate(28, 80)" clip-path="url(#{unique_id}-clip-terminal)">
{backgrounds}
<g class="{unique_id}-matrix">
{matrix}
</g>
</g>
</svg>
"""

HTML_PAGE = """<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="UTF-8">
<title>advisor report</title>
<style>
{stylesheet}
body {{ margin: 0; background: #faf7f0; color: #26292e; font-family: Georgia, "Times New Roman", serif; }}
header {{ border-left: 6px solid #2e7d4e; padding: 18px 28px 8px; }}
header h1 {{ font-size: 22px; font-weight: normal; margin: 0 0 4px; }}
header p {{ color: #6b675e; margin: 0; font-size: 14px; }}
main {{ padding: 8px 28px 28px; }}
pre {{ font-family: "DejaVu Sans Mono", Menlo, Consolas, monospace; font-size: 13px; line-height: 1.3; }}
h2 {{ font-size: 17px; font-weight: normal; border-bottom: 1px solid #c9c2b2; padding-bottom: 4px; }}
.summary p {{ max-width: 60em; line-height: 1.45; }}
.charts svg {{ margin: 8px 16px 8px 0; background: #fffdf8; border: 1px solid #e4ddcc; }}
</style>
</head>
<body>
<header><h1>advisor: page-layout advice</h1>
<p>Advice only: test any layout on a copy of your data before production use.</p></header>
<main>
<section class="summary"><h2>The advice</h2>%SUMMARY%</section>
<section class="charts">%CHARTS%</section>
<h2>The full report</h2>
<pre><code>{code}</code></pre></main>
</body>
</html>
"""


def save_pictures(run: dict, renderable, svg: Path | None, html: Path | None, width: int = 110) -> list[str]:
    """Save the run's charts as one SVG sheet and/or a self-contained HTML page (the advice in
    sentences, the charts inline, then the whole report), atomically; returns the paths."""
    written = []
    if svg is not None:
        _write(svg, chart_sheet(run))
        written.append(str(svg))
    if html is not None:
        console = Console(record=True, width=width, file=io.StringIO(), force_terminal=True, color_system="truecolor")
        console.print(renderable)
        summary = "".join(f"<p>{escape(item['text'])}</p>".replace("\n", "<br>") for item in run["advice"])
        charts = "\n".join(all_charts(run))
        page = HTML_PAGE.replace("%SUMMARY%", _braces(summary)).replace("%CHARTS%", _braces(charts))
        _write(html, console.export_html(theme=PAPER, clear=False, code_format=page, inline_styles=False))
        written.append(str(html))
    return written


def terminal_sheet(renderable, width: int = 110) -> str:
    """The rendered report itself as an SVG page of this project's design (no window chrome)."""
    console = Console(record=True, width=width, file=io.StringIO(), force_terminal=True, color_system="truecolor")
    console.print(renderable)
    text = console.export_svg(theme=PAPER, clear=False, code_format=SVG_PAGE, unique_id="advisor-report")
    return _taller(text, HEADING_PX)


def _braces(text: str) -> str:
    """Text placed inside a str.format template."""
    return text.replace("{", "{{").replace("}", "}}")


def _taller(svg: str, extra: int) -> str:
    """Room below the report for the heading band drawn above it (the viewBox's height + extra)."""
    m = re.search(r'viewBox="0 0 ([0-9.]+) ([0-9.]+)"', svg)
    if not m:
        return svg
    return svg.replace(m.group(0), f'viewBox="0 0 {m.group(1)} {float(m.group(2)) + extra:g}"', 1)


def _write(path: Path, text: str) -> None:
    with atomic_path(path) as tmp:
        Path(tmp).write_text(text, encoding="utf-8")
