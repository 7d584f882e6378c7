"""The key-access histogram: Knuth's hit weights p and miss (gap) weights q.

Keys are identified by their rank 0..n-1 in the key column's own sort order (DuckDB's),
so the numeric core never sees key values. Gap g (0..n) is the open interval before
key 0 (g = 0), between keys g-1 and g, or after key n-1 (g = n).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property

import numpy as np

FEW_LOOKUPS = 1000


@dataclass(frozen=True)
class Histogram:
    """Hit weights ``p`` (length n) and gap weights ``q`` (length n + 1).

    ``null_lookups`` counts lookups of NULL, which no index page answers; they are
    reported, never folded into p or q.
    """

    p: np.ndarray
    q: np.ndarray
    null_lookups: float = 0.0
    source: dict = field(default_factory=dict)

    def __post_init__(self) -> None:
        p = np.ascontiguousarray(self.p, dtype=np.float64)
        q = np.ascontiguousarray(self.q, dtype=np.float64)
        if q.shape != (p.shape[0] + 1,):
            raise ValueError(f"q must have n + 1 = {p.shape[0] + 1} entries, got {q.shape}")
        if p.size and (not np.all(np.isfinite(p)) or p.min() < 0):
            raise ValueError("hit weights must be finite and non-negative")
        if not np.all(np.isfinite(q)) or q.min() < 0:
            raise ValueError("miss weights must be finite and non-negative")
        object.__setattr__(self, "p", p)
        object.__setattr__(self, "q", q)

    @property
    def n(self) -> int:
        return int(self.p.shape[0])

    @property
    def hits(self) -> float:
        return float(self.p.sum())

    @property
    def misses(self) -> float:
        return float(self.q.sum())

    @property
    def total(self) -> float:
        """Weight the index answers: hits plus misses (NULL lookups excluded)."""
        return self.hits + self.misses

    @cached_property
    def key_score(self) -> np.ndarray:
        """Each key's hits plus half the misses of each gap beside it: how much lifting that key
        toward the root is worth to the budgeted constructions."""
        return self.p + 0.5 * (self.q[:-1] + self.q[1:])

    @cached_property
    def score_prefix(self) -> np.ndarray:
        """Running sum of :attr:`key_score` (n + 1 entries, from 0): a range's score in O(1),
        computed once for every budgeted construction of this histogram."""
        out = np.zeros(self.n + 1)
        np.cumsum(self.key_score, out=out[1:])
        return out

    @cached_property
    def score_order(self) -> np.ndarray:
        """Key ranks by :attr:`key_score`, highest first, ties by rank: sorted once per histogram,
        shared by every budgeted construction of its plans and frontier points."""
        order = np.argsort(-self.key_score, kind="stable")
        return order.astype(np.int32) if self.n < 2**31 else order

    def entropy_bits(self) -> float:
        """Shannon entropy (bits) of the outcome distribution over keys and gaps."""
        w = np.concatenate([self.p, self.q])
        t = w.sum()
        if t <= 0:
            return 0.0
        x = w[w > 0] / t
        return float(-(x * np.log2(x)).sum())

    def top_share(self, fraction: float) -> float:
        """Share of hit weight taken by the hottest ``fraction`` of keys (at least one key)."""
        if self.n == 0 or self.hits <= 0:
            return 0.0
        k = max(1, int(np.ceil(fraction * self.n)))
        top = np.partition(self.p, self.n - k)[self.n - k :]
        return float(top.sum() / self.hits)

    def smoothed(self, alpha: float) -> Histogram:
        """Blend with the uniform histogram: (1 - alpha) * weights + alpha * mean weight.

        Additive smoothing toward "every key and gap equally likely", one parameter in [0, 1]:
        it keeps never-seen keys from being pushed arbitrarily deep by a plan fitted to a sample.
        """
        if alpha <= 0 or self.n == 0:
            return self
        mean = self.total / (2 * self.n + 1)
        return Histogram(
            (1 - alpha) * self.p + alpha * mean, (1 - alpha) * self.q + alpha * mean, self.null_lookups, self.source
        )

    def warnings(self) -> list[str]:
        """Plain sentences for a log too thin or too odd to trust the advice on (thresholds are
        round figures of this project's choosing, not measured)."""
        s = self.summary()
        out = []
        if s["lookups"] < FEW_LOOKUPS:
            out.append(f"only {s['lookups']:,.0f} lookups in the log: too few to tell hot keys from luck")
        if s["lookups"] > 0 and s["hits"] <= 0:
            out.append("no lookup in the log found a key: check --log-column and the key's type")
        elif s["miss_share"] > 0.9:
            out.append(f"{s['miss_share']:.0%} of the lookups miss: the layout is fitted mostly to absent values")
        if self.n and s["keys_never_hit"] / self.n > 0.99 and s["hits"] > 0:
            out.append(f"{s['keys_never_hit'] / self.n:.1%} of the keys were never looked up")
        return out

    def summary(self) -> dict:
        """Figures for the report and JSON: sizes, shares and entropy."""
        lookups = self.total + self.null_lookups
        share = (lambda x: x / lookups) if lookups > 0 else (lambda x: 0.0)
        return {
            "keys": self.n,
            "lookups": lookups,
            "hits": self.hits,
            "misses": self.misses,
            "null_lookups": self.null_lookups,
            "hit_share": share(self.hits),
            "miss_share": share(self.misses),
            "null_share": share(self.null_lookups),
            "keys_never_hit": int((self.p == 0).sum()),
            "top_1pct_share": self.top_share(0.01),
            "top_10pct_share": self.top_share(0.10),
            "entropy_bits": self.entropy_bits(),
        }
