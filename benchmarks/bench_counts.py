"""A log aggregated elsewhere: 1 billion lookups as 10 million (key, count) rows in a
hive-partitioned Parquet directory, planned over a 10-million-key table.

Run: .venv/bin/python benchmarks/bench_counts.py [--keys 10000000] [--rows 10000000]
This is the shape a GROUP BY in a distributed engine leaves behind (one folder per day, Parquet
files of key and count). Keys and counts are generated inside DuckDB (invented data): row i
counts max(1, floor(C / (i + 1))) lookups of a key spread over the table by a fixed permutation
(Zipf's law with exponent 1 over the rows), C chosen so the counts add up to about 10^9; every
fifth row looks up a value between two keys (a miss). `advisor recommend DB --log DIR
--count-column n` reads the directory through DuckDB; the run's wall time and peak memory are
recorded. Results: benchmarks/results/counts-1B.txt.
"""

from __future__ import annotations

import argparse
import math
import sys
import time
from pathlib import Path

import duckdb

sys.path.insert(0, str(Path(__file__).resolve().parent))
from bench_scale import run_case  # noqa: E402

PERMUTE = 7919  # coprime with the key counts used here, so i -> i * PERMUTE mod keys is a permutation


def build(directory: Path, keys: int, rows: int, lookups: float) -> tuple[Path, Path]:
    db, logs = directory / f"counts-k{keys}.duckdb", directory / f"counts-k{keys}-r{rows}"
    directory.mkdir(parents=True, exist_ok=True)
    if not db.exists():
        tmp = db.with_name(db.name + ".partial")
        tmp.unlink(missing_ok=True)
        con = duckdb.connect(str(tmp))
        con.execute(f"CREATE TABLE t AS SELECT range * 4 + 10 AS k FROM range({keys})").fetchall()
        con.close()
        tmp.rename(db)
    if not logs.exists():
        scale = lookups / (math.log(rows) + 0.5772)  # harmonic number: sum of 1/(i+1) over the rows
        tmp = logs.with_name(logs.name + ".partial")
        con = duckdb.connect()
        con.execute(
            f"COPY (SELECT ((range * {PERMUTE}) % {keys}) * 4 + 10 + (range % 5 = 4)::INT AS k, "
            f"greatest(1, floor({scale} / (range + 1)))::BIGINT AS n, 1 + range % 2 AS day "
            f"FROM range({rows})) TO '{tmp}' (FORMAT parquet, PARTITION_BY (day))"
        ).fetchall()
        con.close()
        tmp.rename(logs)
    return db, logs


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--keys", type=int, default=10_000_000)
    ap.add_argument("--rows", type=int, default=10_000_000)
    ap.add_argument("--lookups", type=float, default=1e9)
    ap.add_argument("--dir", type=Path, default=Path.home() / ".cache" / "advisor-bench")
    args = ap.parse_args()
    t0 = time.perf_counter()
    db, logs = build(args.dir, args.keys, args.rows, args.lookups)
    built = time.perf_counter() - t0
    # the default plan (budget of the even split, frontier included), the log a Parquet directory
    run, wall, peak = run_case(db, extra=("--count-column", "n"), log=str(logs))
    print(f"{'count rows':>12} {'keys':>12} {'lookups':>15} {'build s':>8} {'wall s':>7} {'hist s':>7} {'peak MiB':>9}")
    print(
        f"{args.rows:>12,} {args.keys:>12,} {run['lookups']:>15,.0f} {built:>8.1f} {wall:>7.1f} "
        f"{run['timings']['histogram_seconds']:>7.1f} {peak:>9.0f}"
    )
    print(f"{'page size':>10} {'even':>7} {'advised':>8} {'saved %':>8} {'bound':>7} {'gap %':>6}  method")
    for p in run["plans"]:
        print(
            f"{p['page_size']:>10} {p['uniform']['expected_page_reads']:>7.3f} "
            f"{p['optimized']['expected_page_reads']:>8.3f} {100 * p['saving']:>8.1f} {p['lower_bound']:>7.3f} "
            f"{100 * p['certified_gap']:>6.1f}  {p['optimized']['method']}"
        )
    print("wall: the whole CLI run in a fresh process (default options, frontier included); build: generating the")
    print("table and the Parquet directory inside DuckDB (once); peak: the run's max RSS")


if __name__ == "__main__":
    main()
