"""Range scans beside point lookups: pages per scan and the blended figure for both layouts.

The optimiser fits layouts to point lookups plus each scan's first probe counted as a lookup
(what a scan pays to find its start); scans are then costed exactly by ``scan_pages``: every
page holding a key of the range plus all their ancestors, each once.
"""

from __future__ import annotations

import numpy as np

from .histogram import Histogram
from .layout import evaluate, scan_pages
from .planner import Plan


def scan_figures(plan: Plan, points: Histogram, first: np.ndarray, last: np.ndarray, weight: np.ndarray) -> dict:
    """Point lookups, range scans and both together, page reads per operation, both layouts."""
    total_scans = float(weight.sum())
    out = {"scans": total_scans, "point_lookups": points.total}
    for side, layout in (("uniform", plan.uniform), ("optimized", plan.recommended)):
        point = evaluate(layout, points).expected_page_reads if points.total > 0 else 0.0
        scan = float(weight @ scan_pages(layout, first, last) / total_scans) if total_scans > 0 else 0.0
        ops = points.total + total_scans
        both = (point * points.total + scan * total_scans) / ops if ops > 0 else 0.0
        out[side] = {"point_lookup_reads": point, "scan_pages": scan, "combined": both}
    return out
