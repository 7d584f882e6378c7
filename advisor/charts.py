"""Charts drawn as plain SVG from a run's JSON: the reads-space frontier, where lookups end by
depth, and page misses by buffer-pool size. Self-contained (no scripts, no external assets), in
this project's palette; used by the HTML page and the SVG sheet."""

from __future__ import annotations

from html import escape

INK, MUTED, RULE = "#26292e", "#6b675e", "#c9c2b2"
EVEN, ADVISED = "#8a8578", "#2e7d4e"
W, H, PAD = 560, 260, 48


def _label(p: dict) -> str:
    size = f"{p['page_size']:,} B" if p.get("page_size") else f"c = {p['keys_per_page']}"
    return size + (" B+" if p.get("model") == "bplus" else "")


def _axes(title: str, x_label: str, y_label: str, x_max: float, y_max: float, x_ticks=None) -> list[str]:
    out = [
        f'<text x="{PAD}" y="20" font-size="14" fill="{INK}">{escape(title)}</text>',
        f'<line x1="{PAD}" y1="{H - PAD}" x2="{W - 16}" y2="{H - PAD}" stroke="{RULE}"/>',
        f'<line x1="{PAD}" y1="{H - PAD}" x2="{PAD}" y2="32" stroke="{RULE}"/>',
        f'<text x="{W - 16}" y="{H - 14}" font-size="11" text-anchor="end" fill="{MUTED}">{escape(x_label)}</text>',
        f'<text x="{PAD + 6}" y="40" font-size="11" fill="{MUTED}">{escape(y_label)}</text>',
    ]
    for i in range(5):
        v = y_max * i / 4
        y = _y(v, y_max)
        out.append(
            f'<text x="{PAD - 6}" y="{y + 4:.1f}" font-size="10" text-anchor="end" fill="{MUTED}">{v:.2f}</text>'
        )
    ticks = x_ticks if x_ticks is not None else [(x_max * i / 4, f"{x_max * i / 4:,.0f}") for i in range(5)]
    for v, text in ticks:
        x = _x(v, x_max)
        out.append(
            f'<text x="{x:.1f}" y="{H - PAD + 14}" font-size="10" text-anchor="middle" fill="{MUTED}">{escape(text)}</text>'
        )
    return out


def _x(v: float, top: float) -> float:
    return PAD + (W - PAD - 24) * (v / top if top > 0 else 0.0)


def _y(v: float, top: float) -> float:
    return (H - PAD) - (H - PAD - 36) * (v / top if top > 0 else 0.0)


def _svg(parts: list[str]) -> str:
    body = "\n".join(parts)
    return f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {W} {H}" width="{W}" height="{H}" font-family="Georgia, serif">\n{body}\n</svg>'


def frontier_chart(plan: dict) -> str | None:
    """Expected reads against pages used, one point per page budget, the even split as a mark."""
    rows = plan.get("frontier")
    if not rows:
        return None
    u = plan["uniform"]
    x_max = max(r["pages"] for r in rows) * 1.05
    y_max = max(u["expected_page_reads"], max(r["expected_page_reads"] for r in rows)) * 1.1
    parts = _axes(f"What more space buys ({_label(plan)})", "pages", "reads per lookup", x_max, y_max)
    pts = " ".join(f"{_x(r['pages'], x_max):.1f},{_y(r['expected_page_reads'], y_max):.1f}" for r in rows)
    parts.append(f'<polyline points="{pts}" fill="none" stroke="{ADVISED}" stroke-width="2"/>')
    for r in rows:
        x, y = _x(r["pages"], x_max), _y(r["expected_page_reads"], y_max)
        parts.append(f'<circle cx="{x:.1f}" cy="{y:.1f}" r="3.5" fill="{ADVISED}"/>')
        parts.append(
            f'<text x="{x + 5:.1f}" y="{y - 6:.1f}" font-size="10" fill="{INK}">{escape(r["max_pages_rule"])}</text>'
        )
    x, y = _x(u["pages"], x_max), _y(u["expected_page_reads"], y_max)
    parts.append(f'<rect x="{x - 4:.1f}" y="{y - 4:.1f}" width="8" height="8" fill="{EVEN}"/>')
    parts.append(f'<text x="{x + 7:.1f}" y="{y + 4:.1f}" font-size="10" fill="{MUTED}">even split</text>')
    return _svg(parts)


def depth_chart(plan: dict) -> str:
    """Share of lookups answered at each depth, even split and advised side by side."""
    u, o = plan["uniform"]["answered_at_depth"], plan["optimized"]["answered_at_depth"]
    depth = max(len(u), len(o), 1)
    ticks = [(d + 0.75, str(d + 1)) for d in range(depth)]
    parts = _axes(f"Where lookups end ({_label(plan)})", "depth", "share", depth + 0.5, 1.0, ticks)
    width = (W - PAD - 24) / (depth + 0.5) / 3
    for d in range(depth):
        for k, (vals, colour) in enumerate(((u, EVEN), (o, ADVISED))):
            v = vals[d] if d < len(vals) else 0.0
            x = _x(d + 0.75, depth + 0.5) + (k - 1) * width
            y = _y(v, 1.0)
            parts.append(
                f'<rect x="{x:.1f}" y="{y:.1f}" width="{width:.1f}" height="{H - PAD - y:.1f}" fill="{colour}"/>'
            )
    parts.append(_legend())
    return _svg(parts)


def pool_chart(plan: dict) -> str | None:
    """Pinned-pool page misses per lookup against pool size, both layouts."""
    rows = plan.get("buffer_pool")
    if not rows:
        return None
    x_max = max(r["pool_pages"] for r in rows) * 1.05
    y_max = max(max(r["uniform_pinned"], r["optimized_pinned"]) for r in rows) * 1.1 or 1.0
    parts = _axes(f"Page misses by pool size ({_label(plan)})", "pool pages", "misses per lookup", x_max, y_max)
    for key, colour in (("uniform_pinned", EVEN), ("optimized_pinned", ADVISED)):
        pts = " ".join(f"{_x(r['pool_pages'], x_max):.1f},{_y(r[key], y_max):.1f}" for r in rows)
        parts.append(f'<polyline points="{pts}" fill="none" stroke="{colour}" stroke-width="2"/>')
    parts.append(_legend())
    return _svg(parts)


def _legend() -> str:
    return (
        f'<rect x="{W - 170}" y="30" width="10" height="10" fill="{EVEN}"/>'
        f'<text x="{W - 155}" y="39" font-size="11" fill="{INK}">even split</text>'
        f'<rect x="{W - 90}" y="30" width="10" height="10" fill="{ADVISED}"/>'
        f'<text x="{W - 75}" y="39" font-size="11" fill="{INK}">advised</text>'
    )


def all_charts(run: dict) -> list[str]:
    out: list[str] = []
    for p in run.get("plans", []):
        for chart in (frontier_chart(p), depth_chart(p), pool_chart(p)):
            if chart:
                out.append(chart)
    return out


def chart_sheet(run: dict) -> str:
    """Every chart of the run stacked on one SVG sheet (what --svg saves)."""
    charts = all_charts(run)
    inner = []
    for i, chart in enumerate(charts):
        inner.append(f'<g transform="translate(0, {i * (H + 12) + 48})">{chart}</g>')
    height = len(charts) * (H + 12) + 60
    return (
        f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {W} {height}" width="{W}" height="{height}" '
        f'font-family="Georgia, serif">\n<rect width="100%" height="100%" fill="#faf7f0"/>\n'
        f'<text x="16" y="28" font-size="18" fill="{INK}">advisor: page-layout advice</text>\n'
        f'<text x="16" y="44" font-size="11" fill="{MUTED}">Advice only: test any layout on a copy of your data '
        "before production use.</text>\n" + "\n".join(inner) + "\n</svg>\n"
    )
