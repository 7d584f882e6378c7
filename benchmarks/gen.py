"""Seeded benchmark workloads written as DuckDB files (invented data, for measurement only)."""

from __future__ import annotations

import os
from pathlib import Path

import duckdb
import numpy as np

WORKLOADS = (
    "zipf0.8-scattered",
    "zipf1.0-scattered",
    "zipf1.2-scattered",
    "zipf1.0-clustered",
    "uniform",
    "zipf1.0-misses10",
)


def zipf_weights(n: int, s: float) -> np.ndarray:
    """Zipf's law pmf over ranks 1..n (same values as scipy.stats.zipfian.pmf, computed directly
    because scipy's per-element harmonic sums are slow at n = 10^6; the tests compare the two)."""
    w = 1.0 / np.arange(1, n + 1, dtype=np.float64) ** s
    return w / w.sum()


def popularity(kind: str, n: int, rng: np.random.Generator) -> np.ndarray:
    """Per-key lookup probability in key order."""
    if kind == "uniform":
        return np.full(n, 1.0 / n)
    s = float(kind.split("-")[0][4:])
    w = zipf_weights(n, s)
    if "clustered" in kind:
        # hot keys packed into a few key ranges: 20 blocks of consecutive keys, the ranks
        # running consecutively inside each block and the blocks in random order
        blocks = rng.permutation(20)
        size = -(-n // 20)
        order = np.concatenate([np.arange(b * size, min(n, (b + 1) * size)) for b in blocks])
        out = np.empty(n)
        out[order] = w
        return out
    return w[rng.permutation(n)]


def build(directory: Path, kind: str, n: int, lookups: int, seed: int = 1) -> Path:
    """Create (once) a DuckDB file with table ``t(k BIGINT)`` and log ``lg(k BIGINT)``."""
    path = directory / f"{kind}-n{n}-l{lookups}-s{seed}.duckdb"
    if path.exists():
        return path
    directory.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(seed)
    keys = np.arange(n, dtype=np.int64) * 4 + 10  # gaps between keys leave room for misses
    prob = popularity(kind, n, rng)
    miss_share = 0.10 if "misses10" in kind else 0.02
    n_miss = int(lookups * miss_share)
    hits = keys[rng.choice(n, size=lookups - n_miss, p=prob)]
    misses = rng.integers(0, 4 * n + 20, size=n_miss)
    misses = misses[(misses - 10) % 4 != 0] if n_miss else misses
    log = np.concatenate([hits, misses]).astype(np.int64)
    rng.shuffle(log)
    tmp = path.with_name(path.name + ".partial")
    if tmp.exists():
        tmp.unlink()
    con = duckdb.connect(str(tmp))
    con.register("k_in", {"k": keys})
    con.execute("CREATE TABLE t AS SELECT k FROM k_in").fetchall()
    con.register("l_in", {"k": log})
    con.execute("CREATE TABLE lg AS SELECT k FROM l_in").fetchall()
    con.close()
    os.replace(tmp, path)
    return path


def cli(*args: str) -> dict:
    """One ``advisor`` command in a fresh process, its --json output parsed."""
    import json
    import subprocess
    import sys

    out = subprocess.run([sys.executable, "-m", "advisor", *args, "--json"], check=True, capture_output=True, text=True)
    return json.loads(out.stdout)
