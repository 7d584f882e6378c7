"""Which page size to pick: expected time per lookup on a storage profile.

    time per lookup = page reads x (latency + page_size / bandwidth)

computed from the advised layout's expected page reads (no cache) and from its page misses
with a buffer pool of a fixed number of bytes (the pinned model: the pool holds
pool_bytes // page_size pages). The named profiles are rough common-practice figures recalled
from vendor data sheets and engineering folklore, not measurements: give your own with
``custom`` latency and bandwidth for real decisions.
"""

from __future__ import annotations

from dataclasses import dataclass

from .bufferpool import pinned_misses
from .histogram import Histogram
from .planner import Plan


@dataclass(frozen=True)
class StorageProfile:
    name: str
    latency_us: float  # per random page read
    bandwidth_mb_s: float  # sequential transfer rate, MB = 10^6 bytes

    def read_us(self, page_size: int) -> float:
        return self.latency_us + page_size / (self.bandwidth_mb_s * 1e6) * 1e6


# common practice, from memory; order-of-magnitude figures only
PROFILES = {
    "nvme": StorageProfile("nvme", 80.0, 2500.0),
    "sata-ssd": StorageProfile("sata-ssd", 150.0, 500.0),
    "network-disk": StorageProfile("network-disk", 1000.0, 250.0),
    "hdd": StorageProfile("hdd", 8000.0, 150.0),
}


def page_size_table(plans: list[Plan], hist: Histogram, profile: StorageProfile, pool_bytes: int) -> dict:
    """Time per lookup for every planned page size, and the page size that minimises it."""
    rows = []
    for p in plans:
        if p.page_size is None:
            continue
        per_read = profile.read_us(p.page_size)
        pool_pages = pool_bytes // p.page_size
        misses = (
            pinned_misses(p.recommended, hist, [pool_pages])[0]
            if pool_pages > 0
            else p.recommended_cost.expected_page_reads
        )
        uni_misses = (
            pinned_misses(p.uniform, hist, [pool_pages])[0] if pool_pages > 0 else p.uniform_cost.expected_page_reads
        )
        rows.append(
            {
                "page_size": p.page_size,
                "keys_per_page": p.keys_per_page,
                "model": p.model,
                "read_us": per_read,
                "optimized_us": p.recommended_cost.expected_page_reads * per_read,
                "uniform_us": p.uniform_cost.expected_page_reads * per_read,
                "pool_pages": int(pool_pages),
                "optimized_with_pool_us": misses * per_read,
                "uniform_with_pool_us": uni_misses * per_read,
            }
        )
    return {
        "profile": {"name": profile.name, "latency_us": profile.latency_us, "bandwidth_mb_s": profile.bandwidth_mb_s},
        "pool_bytes": int(pool_bytes),
        "rows": rows,
    } | best_choice(rows)


def best_choice(rows: list[dict]) -> dict:
    """The fastest page size (and structure), without and with the pool."""
    if not rows:
        return {
            "best_page_size": None,
            "best_page_size_with_pool": None,
            "best_model": None,
            "best_model_with_pool": None,
        }
    a = min(rows, key=lambda r: r["optimized_us"])
    b = min(rows, key=lambda r: r["optimized_with_pool_us"])
    return {
        "best_page_size": a["page_size"],
        "best_page_size_with_pool": b["page_size"],
        "best_model": a["model"],
        "best_model_with_pool": b["model"],
    }


def default_pool_bytes(plans: list[Plan]) -> int:
    """1% of the even split's size at the smallest planned page size, and at least one page of
    the largest planned size (so no page size is judged with a pool of zero pages)."""
    sized = [p for p in plans if p.page_size]
    if not sized:
        return 0
    p = min(sized, key=lambda x: x.page_size)
    largest = max(x.page_size for x in sized)
    return max(largest, int(0.01 * p.uniform.pages * p.page_size))
