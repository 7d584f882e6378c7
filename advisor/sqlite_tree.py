"""Read a real engine's index tree: an SQLite index b-tree, straight from its database file.

Follows SQLite's published "Database File Format" document: the page size at byte 16 of the
100-byte file header; a b-tree page header (type 0x02 interior index, 0x0a leaf index; cell count
at offset 3; right-most child pointer at offset 8 of interior pages), the cell pointer array after
the header; an interior index cell is a 4-byte left child page number, a varint payload size and
the record; a leaf cell is the varint size and the record; a record is a varint header size, the
serial types as varints, then the values (integers big-endian, two's complement).

The tree becomes a classic-B-tree :class:`advisor.layout.Layout` over the index's first column
(integer keys), so the evaluator can cost the engine's real tree. Standard library only.
"""

from __future__ import annotations

import sqlite3
import struct
from collections import deque
from pathlib import Path

import numpy as np

from .errors import InputInvalid
from .layout import Layout, LayoutBuilder

INTERIOR_INDEX, LEAF_INDEX = 0x02, 0x0A
INT_SIZES = {1: 1, 2: 2, 3: 3, 4: 4, 5: 6, 6: 8}


def _varint(buf: bytes, pos: int) -> tuple[int, int]:
    value = 0
    for i in range(9):
        b = buf[pos + i]
        if i == 8:
            return (value << 8) | b, pos + 9
        value = (value << 7) | (b & 0x7F)
        if b < 0x80:
            return value, pos + i + 1
    raise InputInvalid("bad varint")  # pragma: no cover


def _first_integer(buf: bytes, pos: int) -> int:
    """The first column of the record at ``pos``: an integer (serial types 1-6, 8, 9)."""
    start = pos
    header, pos = _varint(buf, pos)
    serial, _ = _varint(buf, pos)
    body = start + header
    if serial == 8:
        return 0
    if serial == 9:
        return 1
    if serial not in INT_SIZES:
        raise InputInvalid("the index's first column is not an integer in every record")
    n = INT_SIZES[serial]
    return int.from_bytes(buf[body : body + n], "big", signed=True)


def sqlite_page_size(path: str | Path) -> int:
    """The page size from the 100-byte file header (bytes 16-17; 1 means 65,536)."""
    try:
        with Path(path).open("rb") as f:
            head = f.read(100)
    except OSError as e:
        raise InputInvalid(f"cannot read {path}: {e.strerror}") from None
    if not head.startswith(b"SQLite format 3\x00") or len(head) < 100:
        raise InputInvalid(f"{path} is not an SQLite database file")
    size = struct.unpack(">H", head[16:18])[0]
    return 65536 if size == 1 else size


def read_index_pages(path: str | Path, index: str) -> tuple[int, dict[int, tuple[list[int], list[int]]]]:
    """(root page, {page number: (keys, child page numbers)}) of an SQLite index; leaves have no
    children; an interior page's children are its cells' left children then the right-most one."""
    page_size = sqlite_page_size(path)
    con = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
    try:
        row = con.execute("SELECT rootpage FROM sqlite_master WHERE type = 'index' AND name = ?", (index,)).fetchone()
    finally:
        con.close()
    if row is None:
        raise InputInvalid(f"no index {index!r} in {path}")
    data = Path(path).read_bytes()
    pages: dict[int, tuple[list[int], list[int]]] = {}
    todo = deque([row[0]])
    while todo:
        number = todo.popleft()
        base = (number - 1) * page_size
        head = base + (100 if number == 1 else 0)
        kind = data[head]
        count = struct.unpack(">H", data[head + 3 : head + 5])[0]
        header_len = 12 if kind == INTERIOR_INDEX else 8
        if kind not in (INTERIOR_INDEX, LEAF_INDEX):
            raise InputInvalid(f"page {number} is not an index b-tree page (type {kind})")
        pointers = [
            struct.unpack(">H", data[head + header_len + 2 * i : head + header_len + 2 * i + 2])[0]
            for i in range(count)
        ]
        keys, kids = [], []
        for ptr in pointers:
            cell = base + ptr
            if kind == INTERIOR_INDEX:
                kids.append(struct.unpack(">I", data[cell : cell + 4])[0])
                cell += 4
            _size, pos = _varint(data, cell)
            keys.append(_first_integer(data, pos))
        if kind == INTERIOR_INDEX:
            kids.append(struct.unpack(">I", data[head + 8 : head + 12])[0])
            todo.extend(kids)
        pages[number] = (keys, kids)
    return row[0], pages


def index_layout(path: str | Path, index: str) -> tuple[Layout, np.ndarray, set[int]]:
    """The index as a Layout over the sorted distinct keys, those keys, and its page numbers."""
    root, pages = read_index_pages(path, index)
    keys = np.array(sorted({k for ks, _ in pages.values() for k in ks}), dtype=np.int64)
    rank = {int(k): i for i, k in enumerate(keys)}
    capacity = max(len(ks) for ks, _ in pages.values())
    b = LayoutBuilder(keys.size, capacity)
    todo = deque([(root, -1, -1)])
    while todo:
        number, parent, slot = todo.popleft()
        ks, kids = pages[number]
        page = b.add(np.array([rank[k] for k in ks], dtype=np.int64), parent, slot)
        todo.extend((child, page, t) for t, child in enumerate(kids))
    return b.build(), keys, set(pages)
