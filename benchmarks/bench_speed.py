"""Speed and memory against the floor: DuckDB's own GROUP BY of the same log, in the same run.

Run: .venv/bin/python benchmarks/bench_speed.py [--keys 1000000] [--lookups 10000000]
For each workload: the time DuckDB takes for SELECT k, count(*) FROM lg GROUP BY k (the tool
must at least read the log), then `advisor recommend` with default options (three page sizes,
the even split's budget, the frontier) in a fresh process: wall time, the ratio to the
aggregation, and that process's peak RSS. Results: benchmarks/results/speed-1M.txt.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import duckdb

sys.path.insert(0, str(Path(__file__).resolve().parent))
from bench_scale import run_case  # noqa: E402
from gen import build  # noqa: E402


def aggregation_seconds(db: Path, repeats: int = 3) -> float:
    con = duckdb.connect(str(db), read_only=True)
    best = float("inf")
    for _ in range(repeats):
        t0 = time.perf_counter()
        con.execute("SELECT k, count(*) FROM lg GROUP BY k").fetchall()
        best = min(best, time.perf_counter() - t0)
    con.close()
    return best


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--keys", type=int, default=1_000_000)
    ap.add_argument("--lookups", type=int, default=10_000_000)
    ap.add_argument("--dir", type=Path, default=Path.home() / ".cache" / "advisor-bench")
    ap.add_argument("--workloads", nargs="*", default=["zipf1.0-scattered", "zipf1.0-clustered", "uniform"])
    args = ap.parse_args()
    print(f"n = {args.keys:,} keys, {args.lookups:,} logged lookups; advisor recommend with default options")
    head = f"{'workload':<20} {'GROUP BY s':>10} {'advisor s':>10} {'ratio':>6} {'peak MiB':>9}"
    print(head)
    print("-" * len(head))
    for kind in args.workloads:
        db = build(args.dir, kind, args.keys, args.lookups)
        agg = aggregation_seconds(db)
        _, wall, peak = run_case(db, "btree", ("even", "even"), extra=())
        print(f"{kind:<20} {agg:>10.2f} {wall:>10.1f} {wall / agg:>6.1f} {peak:>9.0f}", flush=True)
    print("GROUP BY: best of 3 in this process (warm); advisor: one fresh process, start-up included")


if __name__ == "__main__":
    main()
