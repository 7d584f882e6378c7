"""The report at a fixed width: sections, the charts' bars, and the saved SVG/HTML pictures."""

from __future__ import annotations

import functools
import io
import os
from pathlib import Path

import numpy as np
import pytest
from rich.console import Console
from typer.testing import CliRunner

from advisor.budget import BudgetSpec
from advisor.bufferpool import pool_figures
from advisor.cli import app
from advisor.frontier import frontier
from advisor.histogram import Histogram
from advisor.planner import PlanOptions, plan_capacity
from advisor.report import BAR_WIDTH, render_run
from advisor.serialize import run_dict


def _render(run, width=100):
    console = Console(width=width, file=io.StringIO(), color_system=None)
    console.print(render_run(run))
    return console.file.getvalue()


def _run():
    p = np.zeros(50)
    p[7] = 100.0  # one key takes all traffic: advised puts it at the root
    hist = Histogram(p, np.zeros(51))
    plan = plan_capacity(hist, 2, options=PlanOptions(budget=BudgetSpec("none", "none")))
    return run_dict(
        hist, [plan], {"database": "x"}, [], [pool_figures(plan.uniform, plan.recommended, hist, None, [1, 2])]
    )


def test_chart_bars_have_the_right_length():
    run = _run()
    text = _render(run)
    assert run["plans"][0]["optimized"]["answered_at_depth"][0] == 1.0
    bars = text[text.index("Bars:") :]
    line = next(row for row in bars.splitlines() if "depth 1 " in row)
    cells = [c for c in line.split("│") if c.strip()]
    even, advised = cells[-2], cells[-1]
    assert "█" * BAR_WIDTH in advised and "100.0%" in advised  # everything answered at the root
    assert "█" not in even  # the even split answers nothing at its root here
    for section in ("Traffic profile", "Page reads per lookup", "Size and worst case", "Buffer pool", "Bars", "copy"):
        assert section in text


def test_report_is_stable_at_a_fixed_width():
    a, b = _render(_run(), 90), _render(_run(), 90)
    assert a == b
    assert max(len(line) for line in a.splitlines()) <= 90


def test_svg_and_html_pictures(tmp_path):
    runner = CliRunner()
    svg, html = tmp_path / "r.svg", tmp_path / "r.html"
    args = [
        "demo",
        "--dir",
        str(tmp_path),
        "--keys",
        "2000",
        "--lookups",
        "10000",
        "--svg",
        str(svg),
        "--html",
        str(html),
    ]
    res = runner.invoke(app, args)
    assert res.exit_code == 0, res.stderr
    import xml.etree.ElementTree as ET
    from html.parser import HTMLParser

    sheet = ET.fromstring(svg.read_text())  # the SVG sheet is well-formed XML: charts, not a screenshot
    titles = " ".join(t.text or "" for t in sheet.iter("{http://www.w3.org/2000/svg}text"))
    for chart in ("What more space buys", "Where lookups end", "Page misses by pool size"):
        assert chart in titles
    page = html.read_text()
    HTMLParser().feed(page)  # parses with the standard library's parser
    assert "<html" in page.lower() and "Traffic" in page and page.count("<svg") >= 3
    assert "fewer page reads per lookup" in page  # the advice in sentences, above the charts
    # this project's own page: its heading and advice line, no window chrome, no external assets
    for text in (svg.read_text(), page):
        assert "advisor: page-layout advice" in text and "copy of your data" in text
        assert "Generated with Rich" not in text and "https://" not in text
    assert f"Report saved to {svg}" in res.stdout.replace("\n", "")
    again = runner.invoke(app, args)
    assert again.exit_code == 7 and "--force" in again.stderr
    assert not list(tmp_path.glob(".*partial*"))


GOLDEN = Path(__file__).parent / "golden"


@functools.cache  # the 80- and 120-column files render the same run
def _fixed_run(n: int, caps: tuple[int, ...]) -> dict:
    rng = np.random.default_rng(2)
    p = np.round(1000 / np.arange(1, n + 1) ** 1.1)[rng.permutation(n)]
    q = np.zeros(n + 1)
    q[::25] = 7
    hist = Histogram(p, q)
    opts = PlanOptions(exact_seconds=0)
    plans = [plan_capacity(hist, c, options=opts) for c in caps]
    pools = [pool_figures(pl.uniform, pl.recommended, hist, None, [1, 3]) for pl in plans]
    run = run_dict(hist, plans, {"database": "example.duckdb", "table": "parts", "key": "part_no"}, [], pools)
    for entry, pl in zip(run["plans"], plans, strict=True):
        entry["frontier"] = frontier(pl, hist, opts)
    return run


@pytest.mark.parametrize(
    "name, n, caps, width",
    [
        ("report-80.txt", 300, (4, 12), 80),
        ("report-120.txt", 300, (4, 12), 120),
        ("report-deep-80.txt", 1000, (1,), 80),
    ],
)
def test_report_matches_the_golden_file(name, n, caps, width):
    """The whole report of a fixed small run (and of a deep tree: one key per page, 10 levels),
    rendered without colour, equals the committed file (regenerate with ADVISOR_UPDATE_GOLDEN=1
    after a deliberate change); no cell is cut short."""
    text = _render(_fixed_run(n, caps), width)
    path = GOLDEN / name
    if os.environ.get("ADVISOR_UPDATE_GOLDEN"):
        GOLDEN.mkdir(exist_ok=True)
        path.write_text(text)
    assert text == path.read_text()
    assert max(len(line) for line in text.splitlines()) <= width and "…" not in text


def test_nothing_is_cut_at_any_width_with_every_section(tmp_path):
    """Both structures, the held-out check, range scans, pools, the frontier: rendered at 80 and
    60 columns (a pipe, a narrow terminal), no cell or header is cut to an ellipsis; a table too
    wide is drawn without its bars, or stacked one row per block."""
    import io
    import json

    import duckdb
    from rich.console import Console
    from typer.testing import CliRunner

    from advisor.cli import app
    from advisor.report import render_run

    db = tmp_path / "wide.duckdb"
    rng = np.random.default_rng(4)
    con = duckdb.connect(str(db))
    con.execute("CREATE TABLE t AS SELECT range * 2 AS k FROM range(3000)")
    v = (rng.zipf(1.3, 6000) % 3100) * 2
    hi = np.where(rng.random(6000) < 0.1, v + 40, -1)
    con.register("p", {"k": v.astype(np.int64), "hi": hi.astype(np.int64), "seq": np.arange(6000)})
    con.execute("CREATE TABLE lg AS SELECT k, CASE WHEN hi < 0 THEN NULL ELSE hi END AS hi, seq FROM p")
    con.close()
    args = ["recommend", str(db), "--table", "t", "--key", "k", "--log", "lg", "--model", "both"]
    args += ["--order-column", "seq", "--scan-to", "hi", "--page-size", "512", "--page-size", "1024"]
    res = CliRunner().invoke(app, [*args, "--exact-seconds", "0", "--json"])
    assert res.exit_code == 0, res.stderr
    run = json.loads(res.stdout)
    for width in (80, 60):
        console = Console(width=width, file=io.StringIO(), color_system=None)
        console.print(render_run(run))
        text = console.file.getvalue()
        assert "…" not in text
        assert max(len(line) for line in text.splitlines()) <= width
        for figure in ("Held-out", "What more space buys", "Where lookups end"):
            assert figure in text
