"""advisor: page layouts for read-mostly indexes under skewed lookups.

The public API, in the order a run uses it::

    from advisor import load_workload, Request, PageSettings, analyse
    with load_workload("catalogue.duckdb", "parts", "part_no", "lookups") as wl:
        result = analyse(wl, Request(PageSettings(page_sizes=[8192])))
        print(result.run["plans"][0]["optimized"]["expected_page_reads"])

Lower level: ``Histogram`` (hit and gap weights), ``plan_capacity`` (one capacity),
``evaluate`` / ``check_layout`` (the one cost function and the invariant check), ``solve_exact``,
``write_layout`` / ``read_layout``. Every error the library raises on purpose derives from
``AdvisorError`` and carries the CLI's exit code.
"""

from .advise import Analysis, PageSettings, Request, analyse
from .errors import AdvisorError, InputBusy, InputInvalid, InputNotFound, LayoutInvalid, OutputRefused, SettingInvalid
from .export import read_layout, write_layout
from .histogram import Histogram
from .layout import Cost, Layout, check_layout, evaluate
from .optimize import solve_exact
from .planner import Plan, PlanOptions, plan_capacity
from .workload import Workload, load_workload

__all__ = [
    "AdvisorError",
    "Analysis",
    "Cost",
    "Histogram",
    "InputBusy",
    "InputInvalid",
    "InputNotFound",
    "Layout",
    "LayoutInvalid",
    "OutputRefused",
    "PageSettings",
    "Plan",
    "PlanOptions",
    "Request",
    "SettingInvalid",
    "Workload",
    "analyse",
    "check_layout",
    "evaluate",
    "load_workload",
    "plan_capacity",
    "read_layout",
    "solve_exact",
    "write_layout",
]
