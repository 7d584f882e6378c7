"""Compiled search of a mapped index file (format: :mod:`advisor.pagefile`), many lookups a call.

The plain reader parses each page it visits into Python lists and bisects them (about 50 us a
lookup): slower than the device it measures. This one reads the page bytes in place from the
file's memory map, binary-searches the key codes with a byte comparison, and follows child
numbers, for a whole batch of lookups in one call. Page visits are counted exactly as the plain
reader counts them (one per page on the root-to-end path); ``tests/test_build.py`` checks both
against the model, and ``benchmarks/bench_probe.py`` times them side by side.

A lookup is a key code and a mode: EXACT searches for the code itself; BELOW and ABOVE search
for a value just below or just above it that no key equals, which is how a miss in the gap next
to a key travels (the log value itself may have another type, so probe ranks it against the
keys in DuckDB, as ``recommend`` does, and searches for its gap).
"""

from __future__ import annotations

import numpy as np
from numba import njit

EXACT, BELOW, ABOVE = 0, 1, 2
_LEAF, _INTERNAL = 1, 2


@njit(cache=True, inline="always")
def _u32(buf, at):
    return (
        np.int64(buf[at]) | (np.int64(buf[at + 1]) << 8) | (np.int64(buf[at + 2]) << 16) | (np.int64(buf[at + 3]) << 24)
    )


@njit(cache=True, inline="always")
def _u64(buf, at):
    out = np.int64(0)
    for i in range(8):
        out |= np.int64(buf[at + i]) << (8 * i)
    return out


@njit(cache=True, inline="always")
def _compare(buf, start, length, keys, kstart, klen):
    """-1, 0, 1 as the page key buf[start:start+length] is below, equal to, above the probe code."""
    n = min(length, klen)
    for i in range(n):
        a = buf[start + i]
        b = keys[kstart + i]
        if a != b:
            return -1 if a < b else 1
    if length == klen:
        return 0
    return -1 if length < klen else 1


@njit(cache=True, inline="always")
def _visit(buf, base, fixed, keys, ks, kl, mode, starts, lengths):
    """One page at byte ``base`` of ``buf``: (the next page's number, 0 at the end; the row or -1)."""
    kind = buf[base]
    count = _u32(buf, base + 4)
    pos = base + 8
    if fixed:
        for i in range(count):
            starts[i] = pos + i * fixed
            lengths[i] = fixed
        pos += count * fixed
    else:
        for i in range(count):
            ln = np.int64(buf[pos]) | (np.int64(buf[pos + 1]) << 8)
            starts[i] = pos + 2
            lengths[i] = ln
            pos += 2 + ln
    lo, hi = 0, count
    while lo < hi:  # keys below the probe code
        mid = (lo + hi) >> 1
        if _compare(buf, starts[mid], lengths[mid], keys, ks, kl) < 0:
            lo = mid + 1
        else:
            hi = mid
    equal = lo < count and _compare(buf, starts[lo], lengths[lo], keys, ks, kl) == 0
    if kind == _INTERNAL:  # child = separators at or below the value
        slot = lo if mode == BELOW else lo + (1 if equal else 0)
        return _u32(buf, pos + 4 * slot), np.int64(-1)
    if kind == _LEAF:
        if mode == EXACT and equal:
            return np.int64(0), _u64(buf, pos + 4 + 8 * lo)
        return np.int64(0), np.int64(-1)
    if mode == EXACT and equal:  # classic page: the key's own row, or the child between its neighbours
        return np.int64(0), _u64(buf, pos + 4 * (count + 1) + 8 * lo)
    slot = lo + (1 if (mode == ABOVE and equal) else 0)
    return _u32(buf, pos + 4 * slot), np.int64(-1)


@njit(cache=True)
def find_many(buf, page_size, root, fixed, keys, kstarts, klens, which, modes, rows, reads, stops):
    """For lookup j (the code ``which[j]`` of ``keys``, searched in ``modes[j]``): its row number
    (-1 absent) in ``rows[j]``, pages visited in ``reads[j]``, the last page's number in ``stops[j]``."""
    starts = np.empty(page_size, dtype=np.int64)
    lengths = np.empty(page_size, dtype=np.int64)
    for j in range(which.shape[0]):
        ks, kl, mode = kstarts[which[j]], klens[which[j]], modes[j]
        page, visits, row, last = root, 0, np.int64(-1), 0
        while page != 0:
            visits += 1
            last = page
            page, row = _visit(buf, page * page_size, fixed, keys, ks, kl, mode, starts, lengths)
        rows[j] = row
        reads[j] = visits
        stops[j] = last


@njit(cache=True)
def visit_page(page, fixed, keys, ks, kl, mode, starts, lengths):
    """One page read by the caller (``probe --direct``): (next page number or 0, row or -1)."""
    return _visit(page, 0, fixed, keys, ks, kl, mode, starts, lengths)
