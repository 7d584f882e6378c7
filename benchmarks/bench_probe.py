"""The index file's readers side by side: the compiled batch reader against the plain one.

Run: .venv/bin/python benchmarks/bench_probe.py [--keys 1000000] [--lookups 1200000]
Zipf 1.0 with scattered hot keys (benchmarks/gen.py, invented data), 4 KiB pages, default
budgets. For BIGINT keys and for VARCHAR keys of the same ranks ('sku-' + 9 digits, 15 bytes),
both structures, even and advised layouts are built; then, per file:

* ``advisor probe`` end to end in a fresh process (reading the log with DuckDB, ranking it, the
  search, the prediction), wall time, warm (the file in the OS page cache);
* the compiled reader's own time per lookup (the probe's ``microseconds_per_lookup``), warm;
* the plain reader (``PagedIndex.find``, pages parsed into Python lists) on the first 20,000
  lookups of the same log, in this process, warm; ratio plain / compiled.

Counted page reads equal predicted in every row (asserted). Results: benchmarks/results/probe-1M.txt.
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import duckdb

sys.path.insert(0, str(Path(__file__).resolve().parent))
from gen import build  # noqa: E402

from advisor import keycodec  # noqa: E402
from advisor.pagefile import PagedIndex  # noqa: E402

PLAIN_LOOKUPS = 20_000


def cli(*args: str) -> tuple[dict, float]:
    t0 = time.perf_counter()
    out = subprocess.run([sys.executable, "-m", "advisor", *args, "--json"], check=True, capture_output=True, text=True)
    return json.loads(out.stdout), time.perf_counter() - t0


def plain_us(path: Path, db: Path, log: str, key_type: str) -> float:
    """Microseconds per lookup of the plain reader over the first lookups of the log (warm)."""
    con = duckdb.connect(str(db), read_only=True)
    values = [r[0] for r in con.execute(f"SELECT k FROM {log} LIMIT {PLAIN_LOOKUPS}").fetchall()]
    con.close()
    codec = keycodec.codec_for(key_type)
    codes = [keycodec.encode_value(codec, v) for v in values]
    with PagedIndex(path) as index:
        for c in codes[:2000]:  # warm the OS cache for the pages these touch
            index.find(c)
        t0 = time.perf_counter()
        for c in codes:
            index.find(c)
        return 1e6 * (time.perf_counter() - t0) / len(codes)


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--keys", type=int, default=1_000_000)
    ap.add_argument("--lookups", type=int, default=1_200_000)
    ap.add_argument("--dir", type=Path, default=Path.home() / ".cache" / "advisor-bench")
    args = ap.parse_args()
    source = build(args.dir, "zipf1.0-scattered", args.keys, args.lookups)
    print(f"n = {args.keys:,} keys, {args.lookups:,} lookups (Zipf 1.0, scattered); 4 KiB pages; warm")
    head = (
        f"{'key':>7} {'model':>5} {'layout':>7} {'reads':>6} {'=pred':>5} {'probe s':>7} "
        f"{'us/lookup':>9} {'plain us':>8} {'plain/comp':>10}"
    )
    print(head)
    print("-" * len(head))
    with tempfile.TemporaryDirectory() as tmp:
        db = Path(tmp) / "bench.duckdb"
        con = duckdb.connect(str(db))
        con.execute(f"ATTACH '{source}' AS src (READ_ONLY)")
        con.execute("CREATE TABLE t AS SELECT k FROM src.t")
        con.execute("CREATE TABLE lg AS SELECT k FROM src.lg")
        con.execute("CREATE TABLE tw AS SELECT 'sku-' || lpad(k::VARCHAR, 9, '0') AS k FROM src.t")
        con.execute("CREATE TABLE lgw AS SELECT 'sku-' || lpad(k::VARCHAR, 9, '0') AS k FROM src.lg")
        con.close()
        for table, log, key_type in (("t", "lg", "BIGINT"), ("tw", "lgw", "VARCHAR")):
            for model in ("btree", "bplus"):
                for layout in ("even", "advised"):
                    path = Path(tmp) / f"{table}-{model}-{layout}.idx"
                    base = ["build", str(db), "--table", table, "--key", "k", "--log", log, "--page-size", "4096"]
                    extra = ["--key-bytes", "17"] if key_type == "VARCHAR" else []
                    cli(*base, *extra, "--model", model, "--layout", layout, "--out", str(path))
                    cli("probe", str(path), str(db), "--log", log)  # warms the OS cache and the kernels
                    r, seconds = cli("probe", str(path), str(db), "--log", log)
                    assert abs(r["page_reads_per_lookup"] - r["predicted_page_reads_per_lookup"]) < 1e-9
                    plain = plain_us(path, db, log, key_type)
                    comp = r["microseconds_per_lookup"]
                    print(
                        f"{key_type:>7} {model:>5} {layout:>7} {r['page_reads_per_lookup']:>6.3f} {'yes':>5} "
                        f"{seconds:>7.1f} {comp:>9.2f} {plain:>8.1f} {plain / comp:>9.0f}x",
                        flush=True,
                    )
    print(
        "reads: page reads per lookup counted by the compiled reader (=pred: equal to the model's prediction);\n"
        "probe s: wall time of one `advisor probe` process end to end; us/lookup: the compiled search alone;\n"
        f"plain us: the plain reader on the first {PLAIN_LOOKUPS:,} lookups. Measured here: 2 cores, warm page cache."
    )


if __name__ == "__main__":
    main()
