"""Real pages: build the even and the advised layouts as index files and probe them.

Run: .venv/bin/python benchmarks/bench_build.py [--keys 1000000] [--lookups 10000000] [--limit 200000]
Zipf 1.0 with scattered hot keys, 4 KiB pages, default budgets, both structures: `advisor build`
(even and advised), then `advisor probe` cold (the file dropped from the OS page cache first) and
warm (the compiled reader over the file's memory map, one counted read per page visited). Prints
counted and predicted page reads per lookup and the measured microseconds per lookup, side by side.
Results: benchmarks/results/build-1M.txt.
"""

from __future__ import annotations

import argparse
import sys
import tempfile
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
from gen import build, cli  # noqa: E402


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--keys", type=int, default=1_000_000)
    ap.add_argument("--lookups", type=int, default=10_000_000)
    ap.add_argument("--limit", type=int, default=200_000)
    ap.add_argument("--dir", type=Path, default=Path.home() / ".cache" / "advisor-bench")
    args = ap.parse_args()
    db = build(args.dir, "zipf1.0-scattered", args.keys, args.lookups)
    print(f"n = {args.keys:,} keys; probe: the first {args.limit:,} lookups of the log; 4 KiB pages")
    head = (
        f"{'model':>5} {'layout':>7} {'pages':>7} {'cache':>5} {'counted':>8} {'predicted':>9} "
        f"{'us/lookup':>9} {'found':>8}"
    )
    print(head)
    print("-" * len(head))
    with tempfile.TemporaryDirectory() as tmp:
        for model in ("btree", "bplus"):
            for layout in ("even", "advised"):
                path = Path(tmp) / f"{model}-{layout}.idx"
                base = ["build", str(db), "--table", "t", "--key", "k", "--log", "lg", "--page-size", "4096"]
                built = cli(*base, "--model", model, "--layout", layout, "--out", str(path))
                for cold in (True, False):
                    extra = ["--cold"] if cold else []
                    r = cli("probe", str(path), str(db), "--log", "lg", "--limit", str(args.limit), *extra)
                    print(
                        f"{model:>5} {layout:>7} {built['pages']:>7,} {'cold' if cold else 'warm':>5} "
                        f"{r['page_reads_per_lookup']:>8.4f} {r['predicted_page_reads_per_lookup']:>9.4f} "
                        f"{r['microseconds_per_lookup']:>9.1f} {r['found']:>8,}",
                        flush=True,
                    )
    print("counted: one read per page visited; predicted: the cost model on the same lookups and the file's pages")


if __name__ == "__main__":
    main()
