"""Exact solvers side by side: the textbook O(c n^3) recurrence vs the forest solver O(n^3 log c).

Run: .venv/bin/python benchmarks/bench_exact.py [--quick]
Prints (1) both solvers on the same instances (the fast one with float64 and with int32
tables), with the speed-up ratios and a check that the optima agree; (2) the fast solver at
n = 2,000 across capacities; (3) the largest n it solves within 60 s at a few capacities.
Workload: Zipf(1.0) hits scattered over the keys, 5% misses, whole counts (total about 1e7).
"""

from __future__ import annotations

import argparse
import multiprocessing
import resource
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))
from gen import zipf_weights  # noqa: E402

from advisor.histogram import Histogram  # noqa: E402
from advisor.optimize import exact_work, solve_exact, solve_textbook, textbook_work  # noqa: E402


def instance(n: int, seed: int = 3) -> Histogram:
    rng = np.random.default_rng(seed)
    p = np.round(zipf_weights(n, 1.0)[rng.permutation(n)] * 1e7)
    q = np.zeros(n + 1)
    np.add.at(q, rng.integers(0, n + 1, max(1, n // 10)), 0.05 * 1e7 / max(1, n // 10))
    return Histogram(p, np.round(q))


def _child(conn, fn, args):
    t0 = time.perf_counter()
    out = fn(*args)
    dt = time.perf_counter() - t0
    conn.send((out.objective, dt, resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024))


def timed(fn, *args):
    """(objective, seconds, peak RSS MiB) of fn(*args) run in a fresh forked process.

    A child per measurement gives a true peak for each run; tracemalloc is not used because
    tracing every small numpy allocation slowed the solver itself by up to 3x."""
    ctx = multiprocessing.get_context("fork")
    recv, send = ctx.Pipe(duplex=False)
    proc = ctx.Process(target=_child, args=(send, fn, args))
    proc.start()
    out = recv.recv()
    proc.join()
    return out


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--quick", action="store_true", help="small sizes only (a smoke run)")
    args = ap.parse_args()
    pairs = [(200, 8), (300, 50), (400, 100)] if args.quick else [(300, 12), (500, 50), (600, 150), (700, 300)]
    print("1) same instances, both solvers (one run each, same process)")
    print(
        f"{'n':>6} {'c':>5} {'textbook s':>11} {'fast f64 s':>11} {'ratio':>6} {'fast int32 s':>13} {'ratio':>6} "
        f"{'optima equal':>13}"
    )
    for n, c in pairs:
        h = instance(n)
        slow, ts, _ = timed(solve_textbook, h, c)
        flt, tf, _ = timed(solve_exact, h, c, False)
        fast, ti, _ = timed(solve_exact, h, c, True)
        same = slow == flt == fast
        print(
            f"{n:>6} {c:>5} {ts:>11.2f} {tf:>11.2f} {ts / tf:>6.1f} {ti:>13.2f} {ts / ti:>6.1f} {str(same):>13}",
            flush=True,
        )
    n = 600 if args.quick else 2000
    caps = [2, 12, 100] if args.quick else [2, 3, 5, 8, 12, 20, 50, 100, 300, 1000]
    print(f"\n2) fast solver at n = {n:,} (int32 tables)")
    print(f"{'c':>5} {'seconds':>8} {'peak MiB':>9} {'reads':>7} {'Gops est':>9} {'textbook Gops est':>18}")
    for c in caps:
        h = instance(n)
        res, dt, peak = timed(solve_exact, h, c)
        print(
            f"{c:>5} {dt:>8.1f} {peak:>9.0f} {res:>7.3f} {exact_work(n, c)[0] / 1e9:>9.1f} "
            f"{textbook_work(n, c)[0] / 1e9:>18.1f}",
            flush=True,
        )
    print("\n3) largest n solved within 60 s (steps of 500, then 250 from 2,000)")
    for c in [12] if args.quick else [3, 12, 100]:
        best, n = 0, 500
        while n <= (1000 if args.quick else 8000):
            _, dt, _ = timed(solve_exact, instance(n), c)
            print(f"   c={c:<4} n={n:<6} {dt:6.1f} s", flush=True)
            if dt > 60:
                break
            best = n
            n += 250 if n >= 2000 else 500
        print(f"c={c}: largest n within 60 s = {best:,}", flush=True)


if __name__ == "__main__":
    main()
