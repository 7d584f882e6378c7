"""The bundled demo: an invented seed-library catalogue and a day of its lookups.

Scenario (made up for the demo, not real data): the Quillmoor Seed Library keeps one row per
seed packet (``packets``, keyed by a sparse BIGINT ``packet_no``); its lending desk logs every
packet-number lookup (``desk_lookups``). A few hundred packets are in constant demand, the hot
ones scattered over the number range; a long tail is looked up rarely or never; about 6% of
lookups are for numbers that do not exist (typos, withdrawn packets), and a few are NULL (a
blank scan). Everything comes from one seed, so every run builds the same file.
"""

from __future__ import annotations

import os
from pathlib import Path

import duckdb
import numpy as np

from .atomic import atomic_path

DEMO_TABLE = "packets"
DEMO_KEY = "packet_no"
DEMO_LOG = "desk_lookups"


def default_cache_dir() -> Path:
    base = os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache")
    return Path(base) / "advisor"


def build_demo(
    directory: str | os.PathLike | None = None,
    seed: int = 7,
    keys: int = 200_000,
    lookups: int = 1_000_000,
    zipf_s: float = 1.05,
) -> Path:
    """Create (once) and return the demo database for these parameters."""
    directory = Path(directory) if directory else default_cache_dir()
    directory.mkdir(parents=True, exist_ok=True)
    path = directory / f"quillmoor-s{seed}-k{keys}-l{lookups}-z{zipf_s:g}.duckdb"
    if path.exists():
        return path
    rng = np.random.default_rng(seed)
    packet_no = np.sort(rng.choice(np.arange(10_000, 10_000 + 8 * keys), size=keys, replace=False))
    # Zipf-like popularity over a random permutation: hot packets scattered in key order
    popularity = 1.0 / np.arange(1, keys + 1) ** zipf_s
    popularity /= popularity.sum()
    hot_order = rng.permutation(keys)
    n_miss = int(0.06 * lookups)
    n_null = int(0.002 * lookups)
    n_hit = lookups - n_miss - n_null
    hit_keys = packet_no[hot_order[rng.choice(keys, size=n_hit, p=popularity)]]
    existing = set(packet_no.tolist())
    miss_pool = rng.integers(0, 10_000 + 9 * keys, size=4 * n_miss)
    miss_pool = miss_pool[[x not in existing for x in miss_pool.tolist()]][:n_miss]
    looked_up = np.concatenate([hit_keys, miss_pool]).astype(np.float64)
    looked_up = np.concatenate([looked_up, np.full(n_null, np.nan)])
    looked_up = looked_up[rng.permutation(looked_up.size)]
    shelf = rng.integers(1, 400, size=keys)
    with atomic_path(path, output=False) as tmp:
        con = duckdb.connect(str(tmp))
        con.register("k_in", {"packet_no": packet_no.astype(np.int64), "shelf": shelf.astype(np.int64)})
        con.execute(
            f"CREATE TABLE {DEMO_TABLE} AS SELECT packet_no::BIGINT AS packet_no, shelf::INTEGER AS shelf FROM k_in"
        ).fetchall()
        con.register("l_in", {"seq": np.arange(looked_up.size, dtype=np.int64), "v": looked_up})
        con.execute(
            f"CREATE TABLE {DEMO_LOG} AS SELECT seq AS lookup_seq, "
            f"CASE WHEN isnan(v) THEN NULL ELSE v::BIGINT END AS packet_no FROM l_in ORDER BY seq"
        ).fetchall()
        con.close()
    return path
