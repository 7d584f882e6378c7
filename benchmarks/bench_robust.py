"""A 50-million-row log, generated inside DuckDB (never in Python), through `advisor recommend`.

Run: .venv/bin/python benchmarks/bench_robust.py [--rows 50000000] [--keys 1000000]
Shows that the log is aggregated by DuckDB: Python only ever receives O(n) aggregated arrays;
the peak resident memory of the whole run (DuckDB's hash aggregation plus the 1M-key plan) is
recorded beside the wall time.
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import time
from pathlib import Path

import duckdb

sys.path.insert(0, str(Path(__file__).resolve().parent))
from bench_scale import CHILD  # noqa: E402


def build(path: Path, keys: int, rows: int) -> None:
    if path.exists():
        return
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_name(path.name + ".partial")
    tmp.unlink(missing_ok=True)
    con = duckdb.connect(str(tmp))
    con.execute(f"CREATE TABLE t AS SELECT range * 3 AS k FROM range({keys})").fetchall()
    # skewed probes: cube of a uniform variate concentrates lookups on low keys; ~1/3 miss
    con.execute("SELECT setseed(0.42)").fetchall()
    con.execute(
        f"CREATE TABLE lg AS SELECT (floor(pow(random(), 3) * {keys}) * 3 + (range % 3 = 0)::INT)::BIGINT AS k "
        f"FROM range({rows})"
    ).fetchall()
    con.close()
    tmp.rename(path)


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--rows", type=int, default=50_000_000)
    ap.add_argument("--keys", type=int, default=1_000_000)
    ap.add_argument("--dir", type=Path, default=Path.home() / ".cache" / "advisor-bench")
    args = ap.parse_args()
    db = args.dir / f"robust-k{args.keys}-r{args.rows}.duckdb"
    t0 = time.perf_counter()
    build(db, args.keys, args.rows)
    t_build = time.perf_counter() - t0
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
            "lg",
            "--json",
            "--page-size",
            "8192",
        ],
        check=True,
        capture_output=True,
        text=True,
    )
    wall = time.perf_counter() - t0
    peak = int(out.stderr.strip().splitlines()[-1]) / 1024
    run = json.loads(out.stdout)
    print(
        f"{'log rows':>12} {'keys':>10} {'build s':>8} {'wall s':>7} {'hist s':>7} {'peak MiB':>9} {'lookups':>12} "
        f"{'misses':>11}"
    )
    print(
        f"{args.rows:>12,} {args.keys:>10,} {t_build:>8.1f} {wall:>7.1f} {run['timings']['histogram_seconds']:>7.1f} "
        f"{peak:>9.0f} {run['lookups']:>12,.0f} {run['misses']:>11,.0f}"
    )
    print(
        f"(for scale: the raw looked-up values alone, as int64 in numpy, would be {args.rows * 8 / 2**20:,.0f} MiB;"
        " the run never builds such an array)"
    )


if __name__ == "__main__":
    main()
