"""Parquet row groups at 1M keys: bytes per point lookup counted by DuckDB on the even and the
advised file, planning time against DuckDB's own GROUP BY of the log, build time against DuckDB's
own COPY ... (FORMAT parquet), and file sizes. Invented data (an order table of 1M ids with four
payload columns; 10M lookups whose popularity follows Zipf's law with s = 1.0, either on the newest
ids (recency-clustered) or scattered over the ids at random; 10% misses, half inside the key range).

    python benchmarks/bench_rowgroups.py [--keys 1000000] [--lookups 10000000] [--probe 5000]

Prints a table; results/rowgroups-1M.txt holds a committed run."""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import duckdb
import numpy as np
import pyarrow as pa

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
from gen import zipf_weights  # noqa: E402

ADVISOR = [sys.executable, "-m", "advisor"]


def make(path: Path, n: int, lookups: int, kind: str, seed: int = 11) -> None:
    con = duckdb.connect(str(path))
    con.execute(
        f"CREATE TABLE orders AS SELECT i * 3 AS order_id, 'customer-' || (i * 7919 % 80000)::VARCHAR AS customer, "
        f"round((i * 31 % 100000) / 7.0, 2) AS amount, DATE '2021-01-01' + (i // 2000)::INTEGER AS placed, "
        f"(i % 13)::INTEGER AS status FROM range({n}) t(i)"
    )
    rng = np.random.default_rng(seed)
    w = zipf_weights(n, 1.0)
    if kind == "recent":
        w = w[::-1]  # the newest ids (largest) hottest
    else:
        w = w[rng.permutation(n)]
    hits = rng.choice(n, size=int(lookups * 0.9), p=w) * 3
    misses = rng.choice(n, size=lookups - hits.shape[0], p=w) * 3 + 1  # between two ids
    misses[::2] = -misses[::2] - 10  # half outside the key range
    vals = np.concatenate([hits, misses])
    rng.shuffle(vals)
    con.register("v", pa.table({"order_id": vals.astype(np.int64)}))
    con.execute("CREATE TABLE lookups AS SELECT * FROM v")
    con.close()


def run(args: list[str]) -> tuple[dict, float]:
    t0 = time.perf_counter()
    out = subprocess.run(ADVISOR + [str(a) for a in args], capture_output=True, text=True, check=True).stdout
    return json.loads(out), time.perf_counter() - t0


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--keys", type=int, default=1_000_000)
    ap.add_argument("--lookups", type=int, default=10_000_000)
    ap.add_argument("--probe", type=int, default=5000)
    a = ap.parse_args()
    tmp = Path(tempfile.mkdtemp(prefix="bench-rowgroups-"))
    print(f"{a.keys:,} keys, 4 payload columns, {a.lookups:,} lookups; probe: {a.probe:,} sampled lookups per file")
    print(f"duckdb {duckdb.__version__}, pyarrow {pa.__version__}")
    rows = []
    for kind in ("recent", "scattered"):
        db = tmp / f"{kind}.duckdb"
        make(db, a.keys, a.lookups, kind)
        base = [db, "--table", "orders", "--key", "order_id", "--log", "lookups", "--model", "parquet"]
        con = duckdb.connect(str(db), read_only=True)
        t0 = time.perf_counter()
        con.execute("SELECT order_id, count(*) FROM lookups GROUP BY order_id").fetchall()
        t_group = time.perf_counter() - t0
        t0 = time.perf_counter()
        copy = tmp / f"{kind}-copy.parquet"
        con.execute(f"COPY (SELECT * FROM orders ORDER BY order_id) TO '{copy}' (FORMAT parquet)")
        t_copy = time.perf_counter() - t0
        con.close()
        plan, t_plan = run(["recommend", *base, "--json", "--no-frontier"])
        _, t_plan_cli_frontier = run(["recommend", *base, "--json"])
        got = {}
        dcopy, _ = run(
            [
                "probe",
                copy,
                db,
                "--log",
                "lookups",
                "--limit",
                a.probe,
                "--table",
                "orders",
                "--key",
                "order_id",
                "--json",
            ]
        )
        got["duckdb-copy"] = (
            {
                "row_groups": dcopy["row_groups"],
                "modelled_bytes_per_lookup": float("nan"),
                "bytes": copy.stat().st_size,
            },
            t_copy,
            dcopy,
        )
        for layout in ("even", "advised"):
            f = tmp / f"{kind}-{layout}.parquet"
            built, t_build = run(["build", *base, "--out", f, "--layout", layout, "--json"])
            probe, _ = run(["probe", f, db, "--log", "lookups", "--limit", a.probe, "--json"])
            got[layout] = (built, t_build, probe)
        p = plan["plans"][0]
        rows.append((kind, p, got, t_group, t_plan, t_plan_cli_frontier, t_copy))
    print()
    print(
        f"{'workload':10} {'file':8} {'groups':>6} {'KiB/lookup':>11} {'predicted':>10} {'modelled':>9} "
        f"{'groups/lk':>9} {'ms/lookup':>9} {'file MiB':>8} {'build s':>7}"
    )
    for kind, _p, got, *_ in rows:
        for layout in ("duckdb-copy", "even", "advised"):
            built, t_build, probe = got[layout]
            print(
                f"{kind:10} {layout:11} {built['row_groups']:>6} {probe['bytes_per_lookup'] / 1024:>11,.1f} "
                f"{probe['predicted_bytes_per_lookup'] / 1024:>10,.1f} "
                f"{built['modelled_bytes_per_lookup'] / 1024:>9,.1f} "
                f"{probe['row_groups_per_lookup']:>9.3f} {probe['microseconds_per_lookup'] / 1000:>9.2f} "
                f"{built['bytes'] / 2**20:>8.1f} {t_build:>7.1f}"
            )
    print()
    print(
        f"{'workload':10} {'counted even/advised':>20} {'copy/advised':>12} {'GROUP BY s':>10} {'plan s':>7} "
        f"{'ratio':>6} "
        f"{'w/ frontier s':>13} {'COPY s':>7} {'build adv s':>11} {'ratio':>6}"
    )
    for kind, _p, got, t_group, t_plan, t_front, t_copy in rows:
        ratio = got["even"][2]["bytes_per_lookup"] / got["advised"][2]["bytes_per_lookup"]
        ratio_copy = got["duckdb-copy"][2]["bytes_per_lookup"] / got["advised"][2]["bytes_per_lookup"]
        tb = got["advised"][1]
        print(
            f"{kind:10} {ratio:>20.2f} {ratio_copy:>12.2f} {t_group:>10.2f} {t_plan:>7.2f} "
            f"{t_plan / t_group:>6.1f} {t_front:>13.2f} "
            f"{t_copy:>7.2f} {tb:>11.2f} {tb / t_copy:>6.1f}"
        )
    print("\nplan s and build s are whole command runs (process start, DuckDB's aggregation of the log, the byte")
    print("model's sample, the optimiser; build also writes the file); COPY writes DuckDB's own sorted file.")


if __name__ == "__main__":
    main()
