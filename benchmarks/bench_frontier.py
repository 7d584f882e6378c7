"""The reads-space frontier at scale: the advised layout at growing page budgets.

Run: .venv/bin/python benchmarks/bench_frontier.py [--keys 1000000] [--lookups 10000000]
For Zipf 1.0 with scattered and with clustered hot keys, `advisor recommend` (default options,
both structures) and its `frontier` rows: pages allowed, pages used, levels, expected and worst
reads, saving, lower bound. Results: benchmarks/results/frontier-1M.txt.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
from bench_scale import run_case  # noqa: E402
from gen import build  # noqa: E402


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--keys", type=int, default=1_000_000)
    ap.add_argument("--lookups", type=int, default=10_000_000)
    ap.add_argument("--dir", type=Path, default=Path.home() / ".cache" / "advisor-bench")
    args = ap.parse_args()
    print(f"n = {args.keys:,} keys, {args.lookups:,} logged lookups; height limit: the even split's")
    head = (
        f"{'workload':<18} {'model':>5} {'page':>6} {'budget':>6} {'max pages':>9} {'pages':>8} {'lv':>3} "
        f"{'reads':>6} {'saved %':>7} {'worst':>5} {'bound':>6}"
    )
    print(head)
    print("-" * len(head))
    for kind in ("zipf1.0-scattered", "zipf1.0-clustered"):
        db = build(args.dir, kind, args.keys, args.lookups)
        for model in ("btree", "bplus"):
            run, _, _ = run_case(db, model, ("even", "even"), extra=())
            for p in run["plans"]:
                for r in p["frontier"]:
                    cap = "none" if r["max_pages"] is None else f"{r['max_pages']:,}"
                    print(
                        f"{kind:<18} {model:>5} {p['page_size']:>6} {r['max_pages_rule']:>6} {cap:>9} "
                        f"{r['pages']:>8,} {r['height']:>3} {r['expected_page_reads']:>6.3f} "
                        f"{100 * r['saving']:>7.1f} {r['max_page_reads']:>5} {r['lower_bound']:>6.3f}",
                        flush=True,
                    )


if __name__ == "__main__":
    main()
