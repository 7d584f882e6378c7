"""Where to cut a key-sorted table into row groups so that lookups read the fewest bytes.

The problem. Keys 0..n-1 in key order, ``rows[i]`` rows each (a value's rows are never split);
hit weights p (per key) and miss weights q (per gap, as in :class:`advisor.Histogram`). A group
holding keys i..j-1 is read by every lookup whose value lies inside its [min, max]: hits on its
keys and misses in its inner gaps i+1..j-1 (a miss between two groups, or outside every group,
reads none). Write W(i, j) for that weight and R(i, j) for the group's rows. A group read costs
a + b * R bytes (the column chunks a lookup fetches; :mod:`advisor.rowgroups.bytes`), so a
partition costs sum over its groups of W(i, j) * (a + b * R(i, j)); every lookup also reads the
footer, whose size grows with the group count and is added per count outside this module.

Why it is easy. W(i, j) = U[j] - V[i] with U[j] = total - (weight of lookups wholly at or after
key j) and V[i] = weight of lookups wholly before key i, both non-decreasing; R(i, j) = S[j] - S[i]
with S non-decreasing. Expanding cost(i, j) = (U[j] - V[i]) (a + b (S[j] - S[i])), every term
that depends on i alone or on j alone cancels in cost(i, j) + cost(i', j') - cost(i, j') -
cost(i', j) for i < i' < j < j', leaving

    -b [ (U[j'] - U[j]) (S[i'] - S[i]) + (V[i'] - V[i]) (S[j'] - S[j]) ]  <=  0,

the quadrangle inequality (the cost matrix is Monge; Yao, "Efficient dynamic programming using
quadrangle inequalities", STOC 1980). Rows of NULL keys added to the last group only add
b * rows * W(i, n), non-increasing in i, to one column, which keeps the inequality. A minimum
group size makes cost(i, j) infinite for i > lim(j), lim non-decreasing: the entries of the
inequality that stay finite are exactly those it needs. Hence the best start of the last group
is monotone in its end, and

- :func:`best_by_count`: the exact optimum for every group count g <= G, O(G n log n) by divide
  and conquer over ends (layer by layer);
- :func:`best_priced`: the exact optimum of cost + price per group over any count, O(n log n)
  (candidate queue); bisecting the price reaches large budgets, and for any price >= 0,
  value - price * G is a lower bound on every partition of at most G groups (Lagrangian duality).

Checked against brute force over all partitions (n <= 12) and the plain O(G n^2) recurrence
(tests/rowgroups/test_partition.py).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from . import _kernels

LAYER_MEMORY = 384 * 2**20  # bytes of back-pointers the layered optimiser may hold


@dataclass(frozen=True)
class Instance:
    """One partition problem: prefix weights, prefix rows, the byte cost of a group read."""

    U: np.ndarray
    V: np.ndarray
    S: np.ndarray
    tail: float  # rows (NULL keys) that always sit in the last group
    a: float  # bytes per group read
    b: float  # bytes per row of a group read
    min_rows: float

    @property
    def n(self) -> int:
        return int(self.S.shape[0] - 1)

    @property
    def total_rows(self) -> float:
        return float(self.S[-1] + self.tail)

    def cost(self, starts: np.ndarray) -> float:
        """Bytes of group reads (summed over lookups) of the partition whose groups start at
        ``starts`` (first 0, increasing)."""
        ends = np.append(starts[1:], self.n)
        rows = self.S[ends] - self.S[starts]
        rows[-1] += self.tail
        return float(((self.U[ends] - self.V[starts]) * (self.a + self.b * rows)).sum())


def traffic(p: np.ndarray, q: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """U and V of the docstring from hit weights p (n) and gap weights q (n + 1)."""
    n = p.shape[0]
    # lookups wholly at or after key j: hits on keys >= j and misses in gaps >= j
    after = np.zeros(n + 1)
    after[:n] = np.cumsum(p[::-1])[::-1]
    after += np.cumsum(q[::-1])[::-1]
    total = float(p.sum() + q.sum())
    U = total - after
    # lookups wholly before key i: hits on keys < i and misses in gaps <= i
    V = np.zeros(n + 1)
    V[1:] = np.cumsum(p)
    V += np.cumsum(q)
    return U, V


def add_ranges(U: np.ndarray, V: np.ndarray, first, last, weight) -> tuple[np.ndarray, np.ndarray]:
    """U and V with range scans added: a scan over key ranks first..last (first = last + 1 for a
    range holding no key: it reads a group only if it lies inside one) reads group i..j-1 exactly
    when i <= last and j - 1 >= first, so it counts in U[j] unless first >= j and in V[i] when
    last < i: the same form, and the same proof."""
    n = U.shape[0] - 1
    first = np.clip(np.asarray(first, dtype=np.int64), 0, n)
    last = np.clip(np.asarray(last, dtype=np.int64), -1, n - 1)
    w = np.asarray(weight, dtype=np.float64)
    at_or_after = np.cumsum(np.bincount(first, weights=w, minlength=n + 1)[::-1])[::-1]
    before = np.cumsum(np.bincount(last + 1, weights=w, minlength=n + 1))
    return U + w.sum() - at_or_after, V + before


def instance(p, q, rows, tail: float, a: float, b: float, min_rows: float, scans=None) -> Instance:
    """The problem for hit weights p, gap weights q, rows per key and the byte cost of a group
    read; ``scans`` (first ranks, last ranks, weights) adds range scans."""
    U, V = traffic(np.asarray(p, dtype=np.float64), np.asarray(q, dtype=np.float64))
    if scans is not None and len(scans[2]):
        U, V = add_ranges(U, V, *scans)
    S = np.zeros(len(rows) + 1)
    np.cumsum(np.asarray(rows, dtype=np.float64), out=S[1:])
    m = min(float(min_rows), float(S[-1] + tail))
    return Instance(U, V, S, float(tail), float(a), float(b), max(m, 0.0))


@dataclass(frozen=True)
class Cut:
    """A partition: the first key of every group, and its cost (bytes of group reads)."""

    starts: np.ndarray
    cost: float

    @property
    def groups(self) -> int:
        return int(self.starts.shape[0])


def _walk(back: np.ndarray, n: int) -> np.ndarray:
    out = []
    j = n
    while j > 0:
        i = int(back[j])
        out.append(i)
        j = i
    return np.array(out[::-1], dtype=np.int64)


def layers_fit(inst: Instance, G: int) -> bool:
    """Whether the layered optimiser's back-pointers for G groups fit its memory share."""
    return (G + 1) * (inst.n + 1) * 8 <= LAYER_MEMORY


def best_by_count(inst: Instance, G: int) -> list[Cut | None]:
    """The exact best partition into exactly g groups for g = 1..G (index g; None: no such
    partition under the minimum group size). Index 0 is None."""
    n = inst.n
    if n == 0:
        return [None] * (G + 1)
    opt = np.zeros((G + 1, n + 1), dtype=np.int64)
    best = _kernels.layers(inst.U, inst.V, inst.S, n, inst.tail, inst.a, inst.b, inst.min_rows, G, opt)
    out: list[Cut | None] = [None]
    for g in range(1, G + 1):
        if not np.isfinite(best[g]):
            out.append(None)
            continue
        starts = np.empty(g, dtype=np.int64)
        j = n
        for h in range(g, 0, -1):
            i = int(opt[h, j])
            starts[h - 1] = i
            j = i
        out.append(Cut(starts, float(best[g])))
    return out


def best_priced(inst: Instance, price: float) -> tuple[Cut, float]:
    """The best partition for cost + ``price`` per group, over any count; returns it and the
    priced value (cost + price * groups)."""
    start = np.zeros(inst.n + 1, dtype=np.int64)
    value, _ = _kernels.priced(inst.U, inst.V, inst.S, inst.n, inst.tail, inst.a, inst.b, inst.min_rows, price, start)
    starts = _walk(start, inst.n)
    return Cut(starts, inst.cost(starts)), float(value)


def best_within(inst: Instance, G: int, base_price: float = 0.0, rounds: int = 60) -> tuple[Cut, float]:
    """The best partition of at most G groups for cost + ``base_price`` per group, by bisecting
    an extra price; returns it and a lower bound on cost + base_price * groups over every
    partition of at most G groups (equal to its value when the search lands on G exactly)."""
    cut, value = best_priced(inst, base_price)
    if cut.groups <= G:
        return cut, value  # the budget does not bind: this is the unconstrained optimum
    lo, hi = 0.0, max(1.0, inst.cost(np.zeros(1, dtype=np.int64)))
    best, bound = None, -np.inf
    for _ in range(rounds):
        mid = (lo + hi) / 2
        c, v = best_priced(inst, base_price + mid)
        bound = max(bound, v - mid * G)
        if c.groups <= G:
            hi = mid
            if best is None or c.cost + base_price * c.groups < best.cost + base_price * best.groups:
                best = c
            if c.groups == G:
                break
        else:
            lo = mid
    if best is None:  # the top price failed to bring the count down: one group always fits
        best = Cut(np.zeros(1, dtype=np.int64), inst.cost(np.zeros(1, dtype=np.int64)))
    return best, bound
