"""Device time: does the time saving follow the page saving when every read reaches the device?

Run: .venv/bin/python benchmarks/bench_direct.py [--keys 1000000] [--lookups 1200000] [--limit 20000]
Zipf 1.0 with scattered hot keys (benchmarks/gen.py, invented data), 4 KiB pages, default
budgets, BIGINT keys. The even and advised files of both structures are built, then timed in one
``advisor probe --direct`` run: every page read with O_DIRECT, the four files taking turns block
by block over the first ``--limit`` lookups of the log, so machine drift falls on all alike.
Printed: counted page reads per lookup, microseconds per lookup (mean, median, spread over
blocks), microseconds per page read, and the advised file's saving in reads and in time.
Results: benchmarks/results/direct-1M.txt (this machine: a virtual disk, /dev/vda, ext4; the
host may cache it, so a read is what this machine's device answers, not a bare SSD).
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
    ap.add_argument("--lookups", type=int, default=1_200_000)
    ap.add_argument("--limit", type=int, default=20_000)
    ap.add_argument("--dir", type=Path, default=Path.home() / ".cache" / "advisor-bench")
    args = ap.parse_args()
    db = build(args.dir, "zipf1.0-scattered", args.keys, args.lookups)
    print(f"n = {args.keys:,} keys; {args.limit:,} lookups timed with O_DIRECT; 4 KiB pages; BIGINT keys")
    with tempfile.TemporaryDirectory(dir=Path.home()) as tmp:  # on the disk, not a tmpfs
        files = []
        for model in ("btree", "bplus"):
            for layout in ("even", "advised"):
                path = Path(tmp) / f"{model}-{layout}.idx"
                base = ["build", str(db), "--table", "t", "--key", "k", "--log", "lg", "--page-size", "4096"]
                cli(*base, "--model", model, "--layout", layout, "--out", str(path))
                files.append(str(path))
        res = cli("probe", *files, str(db), "--log", "lg", "--direct", "--limit", str(args.limit))
    head = (
        f"{'model':>5} {'layout':>7} {'reads':>6} {'us/lookup':>9} {'median':>7} {'spread':>11} "
        f"{'us/read':>7} {'fewer reads':>11} {'less time':>9}"
    )
    print(head)
    print("-" * len(head))
    rows = res["files"]
    for i, f in enumerate(rows):
        name = Path(f["path"]).stem
        model, layout = name.split("-")
        even = rows[i - 1] if layout == "advised" else None
        lo, hi = f["microseconds_per_lookup_spread"]
        saved = ""
        if even:
            reads = 1 - f["page_reads_per_lookup"] / even["page_reads_per_lookup"]
            time = 1 - f["microseconds_per_lookup"] / even["microseconds_per_lookup"]
            saved = f"{100 * reads:>10.1f}% {100 * time:>8.1f}%"
        print(
            f"{model:>5} {layout:>7} {f['page_reads_per_lookup']:>6.3f} {f['microseconds_per_lookup']:>9.1f} "
            f"{f['microseconds_per_lookup_median']:>7.1f} {lo:>5.0f}-{hi:<5.0f} "
            f"{f['microseconds_per_page_read']:>7.1f} "
            f"{saved}"
        )
    print(f"{res['blocks']} blocks; spread: microseconds per lookup over blocks, lowest-highest")


if __name__ == "__main__":
    main()
