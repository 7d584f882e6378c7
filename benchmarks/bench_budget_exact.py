"""The exact budgeted DP (one price per page) against an older checkout's, side by side.

Run: .venv/bin/python benchmarks/bench_budget_exact.py [--reference DIR]
DIR is a checkout of an earlier commit (e.g. `git worktree add /tmp/ref e5bf58d`), imported in
a subprocess so both versions run on the same instances in one run. Prints, per instance, the
seconds of one full bisection (solve_within at the even split's pages and levels) for each, their
ratio, and whether both found the same expected page reads. Without --reference, only this
checkout. Results: benchmarks/results/budget-exact.txt.
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
CASES = [(1000, c) for c in (3, 5, 12, 20)] + [(1500, 12), (1500, 20)]

CHILD = """
import json, sys, time
sys.path.insert(0, {bench!r})
from bench_quality import histogram
from advisor.optimize import uniform_layout
from advisor.optimize.constrained import solve_within
out = []
for n, c in {cases!r}:
    h = histogram("zipf1.0-scattered", n, 100 * n)
    even = uniform_layout(n, c)
    t0 = time.perf_counter()
    r = solve_within(h, c, even.pages, int(even.depths().max()))
    out.append([n, c, time.perf_counter() - t0, r.expected_page_reads, r.evaluations])
print(json.dumps(out))
"""


def run(root: Path) -> list:
    code = CHILD.format(bench=str(HERE), cases=CASES)
    env = {"PYTHONPATH": str(root)}  # and cwd: "-c" puts the working directory first on sys.path
    res = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True, env=env, cwd=root)
    return json.loads(res.stdout)


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--reference", type=Path, default=None)
    args = ap.parse_args()
    now = run(HERE.parent)
    ref = run(args.reference) if args.reference else None
    print("Zipf 1.0 scattered, 100 lookups per key; budget: the even split's pages and levels")
    head = f"{'n':>6} {'c':>3} {'this s':>8} {'DP runs':>7}"
    if ref:
        head += f" {'ref s':>8} {'ratio':>6} {'same':>5}"
    print(head)
    print("-" * len(head))
    for k, (n, c, t, reads, runs) in enumerate(now):
        line = f"{n:>6,} {c:>3} {t:>8.2f} {runs:>7}"
        if ref:
            rt, rreads = ref[k][2], ref[k][3]
            line += f" {rt:>8.2f} {rt / t:>6.1f} {str(abs(rreads - reads) < 1e-9):>5}"
        print(line, flush=True)


if __name__ == "__main__":
    main()
