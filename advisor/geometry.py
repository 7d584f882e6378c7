"""Page geometry: how many keys fit on a page of a given size.

    c = floor((page_size - page_header) / (key_bytes + record_pointer + child_pointer))

Defaults (common practice, not measured on any particular engine): a 64-byte page header
(engines use roughly 24 to 128 bytes), 8-byte record pointers (a row id or file offset) and
8-byte child pointers (a page number). Fixed-width key types use their storage width in
DuckDB; VARCHAR and BLOB use the measured mean byte length plus a 2-byte length prefix.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass

import numpy as np

from .errors import SettingInvalid

DEFAULT_PAGE_SIZES = (4096, 8192, 16384)
DEFAULT_PAGE_HEADER = 64
DEFAULT_RECORD_POINTER = 8
DEFAULT_CHILD_POINTER = 8
LENGTH_PREFIX = 2

FIXED_WIDTH = {
    "BOOLEAN": 1,
    "TINYINT": 1,
    "UTINYINT": 1,
    "SMALLINT": 2,
    "USMALLINT": 2,
    "INTEGER": 4,
    "UINTEGER": 4,
    "BIGINT": 8,
    "UBIGINT": 8,
    "HUGEINT": 16,
    "UHUGEINT": 16,
    "FLOAT": 4,
    "DOUBLE": 8,
    "DATE": 4,
    "TIME": 8,
    "TIMESTAMP": 8,
    "TIMESTAMP_S": 8,
    "TIMESTAMP_MS": 8,
    "TIMESTAMP_NS": 8,
    "TIMESTAMP WITH TIME ZONE": 8,
    "UUID": 16,
    "INTERVAL": 16,
}


def decimal_width(type_name: str) -> int:
    """DuckDB stores DECIMAL(w, s) in 2, 4, 8 or 16 bytes depending on w."""
    inside = type_name[type_name.index("(") + 1 : type_name.index(")")] if "(" in type_name else "18"
    w = int(inside.split(",")[0])
    return 2 if w <= 4 else 4 if w <= 9 else 8 if w <= 18 else 16


def fixed_key_bytes(type_name: str) -> int | None:
    """Storage width of a fixed-width key type, or None for variable-width types."""
    t = type_name.upper()
    if t.startswith("DECIMAL"):
        return decimal_width(t)
    return FIXED_WIDTH.get(t)


@dataclass(frozen=True)
class Geometry:
    """Inputs and result of the capacity formula for one page size."""

    page_size: int
    page_header: int
    key_bytes: float
    record_pointer: int
    child_pointer: int
    fill_factor: float = 1.0  # the even split's leaves: share of each page a bulk loader fills
    separator_bytes: float | None = None  # B+-tree internal pages: shortened separators, if measured

    @property
    def entry_bytes(self) -> float:
        return self.key_bytes + self.record_pointer + self.child_pointer

    @property
    def min_page_size(self) -> int:
        return int(math.ceil(self.page_header + self.entry_bytes))

    @property
    def capacity(self) -> int:
        return int(math.floor((self.page_size - self.page_header) / self.entry_bytes))

    @property
    def leaf_capacity(self) -> int:
        """B+-tree: entries (key + record pointer) per full leaf (the even split fills
        ``fill_factor`` of it, as a bulk loader does; the advice may fill it)."""
        return int(math.floor((self.page_size - self.page_header) / (self.key_bytes + self.record_pointer)))

    @property
    def fanout(self) -> int:
        """B+-tree: children per internal page, m pointers and m - 1 separators:
        F = floor((page_size - page_header + s) / (s + child_pointer)), s the separator width: the
        key width, or the measured width of suffix-truncated separators."""
        s = self.separator_bytes if self.separator_bytes is not None else self.key_bytes
        return int(math.floor((self.page_size - self.page_header + s) / (s + self.child_pointer)))

    @property
    def untruncated_fanout(self) -> int:
        return int(
            math.floor((self.page_size - self.page_header + self.key_bytes) / (self.key_bytes + self.child_pointer))
        )

    def formula(self) -> str:
        return (
            f"floor(({self.page_size} - {self.page_header}) / "
            f"({self.key_bytes:g} + {self.record_pointer} + {self.child_pointer})) = {self.capacity}"
        )

    def as_dict(self) -> dict:
        return asdict(self) | {
            "keys_per_page": self.capacity,
            "leaf_capacity": self.leaf_capacity,
            "fanout": self.fanout,
            "untruncated_fanout": self.untruncated_fanout,
        }


def geometry_for(
    page_size: int,
    key_bytes: float,
    page_header: int = DEFAULT_PAGE_HEADER,
    record_pointer: int = DEFAULT_RECORD_POINTER,
    child_pointer: int = DEFAULT_CHILD_POINTER,
    fill_factor: float = 1.0,
) -> Geometry:
    """Check the figures and return the geometry (whether a key fits, and the fill factors, are
    the structure's checks: :meth:`advisor.structures.ClassicTree.capacity`, ``structure_for``)."""
    if page_header < 0 or record_pointer < 0 or child_pointer < 0:
        raise SettingInvalid("page header and pointer sizes must not be negative")
    if key_bytes <= 0:
        raise SettingInvalid(f"key width must be positive, got {key_bytes:g}")
    g = Geometry(
        int(page_size), int(page_header), float(key_bytes), int(record_pointer), int(child_pointer), float(fill_factor)
    )
    return g


def longest_keys_width(
    lengths: np.ndarray, page_size: int, page_header: int, record_pointer: int, child_pointer: int
) -> float:
    """The key width to size pages of variable-length keys so that every page can be built.

    ``lengths`` are the keys' stored widths (length prefix included), longest first. A page of an
    advised layout may hold any c keys (hot keys are lifted from anywhere), so c is safe only if
    the c longest keys fit: the largest such c is found from the running sum, and the width
    returned is those keys' mean. Any capacity floor(room / (width + extra)) computed from it is
    safe too, because the mean of the c' longest keys never exceeds it for c' >= c. With widths
    that follow key order, sizing by the plain mean let whole pages of long keys overflow."""
    if lengths.size == 0:
        return 1.0
    room = page_size - page_header
    per = np.cumsum(lengths.astype(np.float64)) + np.arange(1, lengths.size + 1) * (record_pointer + child_pointer)
    c = int(np.searchsorted(per, room, side="right"))  # the c longest keys fit: per[c - 1] <= room
    if c == 0:
        return float(lengths[0])  # not even the longest key fits: the geometry says so
    return float(per[c - 1] - c * (record_pointer + child_pointer)) / c
