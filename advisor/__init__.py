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

import os
from importlib import import_module

# The compiled kernels at LLVM optimisation level 2 instead of numba's default 3: the same run
# time measured (budgeted constructions and the pilot construction at 1M keys), and the one-off
# compile on a new machine 28 s -> 21-22 s (benchmarks/results/kernels.txt). Read by numba when it
# is first imported; a value the user set is kept.
os.environ.setdefault("NUMBA_OPT", "2")

# Names load on first use (PEP 562), so that the console entry point can take over Ctrl-C
# before numpy and DuckDB are imported.
_HOME = {
    "Analysis": "advise",
    "PageSettings": "advise",
    "Request": "advise",
    "analyse": "advise",
    "RunResult": "result",
    "PlanResult": "result",
    "AdvisorError": "errors",
    "InputBusy": "errors",
    "InputInvalid": "errors",
    "InputNotFound": "errors",
    "LayoutInvalid": "errors",
    "OutputRefused": "errors",
    "SettingInvalid": "errors",
    "read_layout": "export",
    "write_layout": "export",
    "Histogram": "histogram",
    "Cost": "layout",
    "Layout": "layout",
    "check_layout": "layout",
    "evaluate": "layout",
    "solve_exact": "optimize",
    "Plan": "planner",
    "PlanOptions": "planner",
    "plan_capacity": "planner",
    "Workload": "workload",
    "load_workload": "workload",
    "PagedIndex": "pagefile",
    "build_index": "build",
    "probe_index": "build",
    "BudgetSpec": "budget",
}


def __getattr__(name: str):
    if name in _HOME:
        value = getattr(import_module(f".{_HOME[name]}", __name__), name)
        globals()[name] = value
        return value
    raise AttributeError(f"module 'advisor' has no attribute {name!r}")


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(_HOME))


__all__ = [
    "AdvisorError",
    "BudgetSpec",
    "PagedIndex",
    "build_index",
    "probe_index",
    "Analysis",
    "RunResult",
    "PlanResult",
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
