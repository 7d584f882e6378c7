"""End-to-end `advisor recommend` on large seeded workloads: time, peak memory, reads, bound, gap.

Run: .venv/bin/python benchmarks/bench_scale.py [--keys 1000000] [--lookups 10000000]
Each case runs the real CLI in a fresh subprocess (so peak RSS is that run's own) with the
three default page sizes, and prints one row per page size. Results: benchmarks/results/.
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
from gen import WORKLOADS, build  # noqa: E402

CHILD = """
import resource, sys
from advisor.cli import app
try:
    app(sys.argv[1:])
except SystemExit as e:
    code = e.code
print(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss, file=sys.stderr)
"""


def run_case(
    db: Path,
    model: str = "btree",
    budget: tuple[str, str] = ("even", "even"),
    extra: tuple[str, ...] = ("--no-frontier",),
    log: str = "lg",
) -> tuple[dict, float, float]:
    """Run the CLI on table t, key k and ``log`` in a fresh process; returns (JSON, wall
    seconds, that process's peak MiB)."""
    t0 = time.perf_counter()
    out = subprocess.run(
        [
            sys.executable,
            "-c",
            CHILD,
            "recommend",
            str(db),
            "--table",
            "t",
            "--key",
            "k",
            "--log",
            log,
            "--json",
            "--model",
            model,
            "--max-pages",
            budget[0],
            "--max-height",
            budget[1],
            *extra,
        ],
        check=True,
        capture_output=True,
        text=True,
    )
    wall = time.perf_counter() - t0
    peak_kib = int(out.stderr.strip().splitlines()[-1])
    return json.loads(out.stdout), wall, peak_kib / 1024


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--keys", type=int, default=1_000_000)
    ap.add_argument("--lookups", type=int, default=10_000_000)
    ap.add_argument("--dir", type=Path, default=Path.home() / ".cache" / "advisor-bench")
    ap.add_argument("--workloads", nargs="*", default=list(WORKLOADS))
    ap.add_argument("--model", default="btree", choices=["btree", "bplus"])
    ap.add_argument(
        "--budgets",
        nargs="*",
        default=["even/even", "none/none"],
        help="page/height budgets to run, each as PAGES/HEIGHT (as --max-pages / --max-height)",
    )
    args = ap.parse_args()
    print(f"n = {args.keys:,} keys, {args.lookups:,} logged lookups, page sizes 4096/8192/16384, model {args.model}")
    head = (
        f"{'workload':<20} {'budget':>10} {'c':>5} {'wall s':>7} {'hist s':>7} {'plan s':>7} {'peak MiB':>9} "
        f"{'even':>7} {'advised':>8} {'bound':>7} {'gap %':>6} {'saved %':>8} {'pages even':>10} "
        f"{'advised':>9} {'lv':>3} {'lv':>3}  method"
    )
    print(head)
    print("-" * len(head))
    for kind in args.workloads:
        db = build(args.dir, kind, args.keys, args.lookups)
        for budget in args.budgets:
            run, wall, peak = run_case(db, args.model, tuple(budget.split("/")))
            for p in run["plans"]:
                u, o = p["uniform"], p["optimized"]
                print(
                    f"{kind:<20} {budget:>10} {p['keys_per_page']:>5} {wall:>7.1f} "
                    f"{run['timings']['histogram_seconds']:>7.1f} {p['seconds']:>7.1f} {peak:>9.0f} "
                    f"{u['expected_page_reads']:>7.3f} {o['expected_page_reads']:>8.3f} {p['lower_bound']:>7.3f} "
                    f"{100 * p['certified_gap']:>6.1f} {100 * p['saving']:>8.1f} {u['pages']:>10,} {o['pages']:>9,} "
                    f"{u['height']:>3} {o['height']:>3}  {o['method']}",
                    flush=True,
                )
    print("wall: whole CLI run incl. start-up; hist: DuckDB histogram; plan: one page size; peak: max RSS of the run;")
    print("budget: --max-pages/--max-height; pages and lv (levels): even split, then advised")


if __name__ == "__main__":
    main()
