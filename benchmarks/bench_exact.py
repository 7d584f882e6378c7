"""Exact solvers side by side: the textbook O(c n^3) recurrence vs forest halving O(n^3 log c).

Run: .venv/bin/python benchmarks/bench_exact.py [--quick]
Prints (1) both solvers on the same instances, with the speed-up ratio and a check that the
optima agree; (2) the halving solver at n = 2,000 across capacities; (3) the largest n it solves
within 60 s at a few capacities. Workload: Zipf(1.0) hits scattered over the keys, 5% misses.
"""

from __future__ import annotations

import argparse
import sys
import time
import tracemalloc
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


def timed(fn, *args):
    tracemalloc.start()
    t0 = time.perf_counter()
    out = fn(*args)
    dt = time.perf_counter() - t0
    peak = tracemalloc.get_traced_memory()[1] / 2**20
    tracemalloc.stop()
    return out, dt, peak


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--quick", action="store_true", help="small sizes only (a smoke run)")
    args = ap.parse_args()
    pairs = [(200, 8), (300, 50), (400, 100)] if args.quick else [(300, 12), (500, 50), (600, 150), (700, 300)]
    print("1) same instances, both solvers (one run each, same process)")
    print(f"{'n':>6} {'c':>5} {'textbook s':>11} {'halving s':>10} {'ratio':>7} {'optima equal':>13}")
    for n, c in pairs:
        h = instance(n)
        slow, ts, _ = timed(solve_textbook, h, c)
        fast, tf, _ = timed(solve_exact, h, c)
        print(f"{n:>6} {c:>5} {ts:>11.2f} {tf:>10.2f} {ts / tf:>7.1f} {str(slow.objective == fast.objective):>13}", flush=True)
    n = 600 if args.quick else 2000
    caps = [2, 12, 100] if args.quick else [2, 3, 5, 8, 12, 20, 50, 100, 300, 1000]
    print(f"\n2) halving solver at n = {n:,}")
    print(f"{'c':>5} {'seconds':>8} {'peak MiB':>9} {'reads':>7} {'Gops est':>9} {'textbook Gops est':>18}")
    for c in caps:
        h = instance(n)
        res, dt, peak = timed(solve_exact, h, c)
        print(f"{c:>5} {dt:>8.1f} {peak:>9.0f} {res.objective:>7.3f} {exact_work(n, c)[0] / 1e9:>9.1f} "
              f"{textbook_work(n, c)[0] / 1e9:>18.1f}", flush=True)  # fmt: skip
    print("\n3) largest n solved within 60 s (doubling search, then steps of 250)")
    for c in ([12] if args.quick else [3, 12, 100]):
        best, n = 0, 500
        while n <= (1000 if args.quick else 6000):
            _, dt, _ = timed(solve_exact, instance(n), c)
            print(f"   c={c:<4} n={n:<6} {dt:6.1f} s", flush=True)
            if dt > 60:
                break
            best = n
            n += 250 if n >= 1500 else 500
        print(f"c={c}: largest n within 60 s = {best:,}", flush=True)


if __name__ == "__main__":
    main()
