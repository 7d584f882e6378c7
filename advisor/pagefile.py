"""This project's paged index file: a layout written as fixed-size pages, and a reader for it.

Format (version 1, little-endian, documented in the README):

* page 0, the header: magic ``b"ADVPGIX1"``, u32 format version, u32 page size, u8 structure
  (0 classic B-tree, 1 B+-tree), u8 key encoding (0 fixed width, 1 length-prefixed), u16 key
  width (fixed encodings; 0 otherwise), u64 pages (tree pages, header excluded), u64 root page,
  u64 keys, f64 predicted expected page reads, then four strings, each u16 length + UTF-8: the
  key codec name, the key type, the table, the key column.
* tree page p (1 = root) at byte offset p x page size: u8 kind (0 classic page, 1 B+ leaf, 2 B+
  internal), 3 bytes zero, u32 count, then the count keys (fixed width, or u16 length + bytes
  each), then
  - classic page: count + 1 u32 child page numbers (0 = empty slot), count u64 row numbers;
  - B+ leaf: u32 next leaf (0 = last), count u64 row numbers;
  - B+ internal: count + 1 u32 child page numbers (count separators, count + 1 children).

Keys are stored in an order-preserving byte code (:mod:`advisor.keycodec`), so comparing codes as
bytes is comparing keys in DuckDB's order. A row number is the key's row in the table's scan
order (DuckDB's ``rowid``; the first row of a repeated value with --distinct-keys).
"""

from __future__ import annotations

import bisect
import mmap
import os
import struct
import zlib
from collections import OrderedDict
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from . import keycodec
from .atomic import atomic_path
from .errors import InputInvalid, InputNotFound, LayoutInvalid, OutputRefused, SettingInvalid
from .layout import Layout

MAGIC = b"ADVPGIX1"
VERSION = 2  # 2: a CRC-32 in the last four bytes of every page (1 had none and is refused)
CHECK = 4  # bytes of the checksum at the end of each page
_HEAD = struct.Struct("<8sIIBBHQQQd")
_PAGE = struct.Struct("<B3xI")
CLASSIC, LEAF, INTERNAL = 0, 1, 2


@dataclass(frozen=True)
class Header:
    page_size: int
    structure: str
    fixed_width: int  # 0: length-prefixed keys
    pages: int
    root: int
    keys: int
    predicted_page_reads: float
    codec: str
    key_type: str
    table: str
    key: str


def _strings(*items: str) -> bytes:
    out = b""
    for s in items:
        b = s.encode("utf-8")
        out += struct.pack("<H", len(b)) + b
    return out


def _key_block(codes: list[bytes], fixed: int) -> bytes:
    if fixed:
        return b"".join(codes)
    return b"".join(struct.pack("<H", len(c)) + c for c in codes)


def page_bytes(layout: Layout, codes: list[bytes], rows: np.ndarray, fixed: int) -> list[bytes]:
    """The bytes of every tree page, in page-id order (file page = page id + 1)."""
    P = layout.pages
    kids: dict[int, dict[int, int]] = {}
    for p in range(1, P):
        kids.setdefault(int(layout.parent[p]), {})[int(layout.slot[p])] = p + 1
    out = []
    bplus = layout.structure == "bplus"
    # the leaf chain runs in key order (page ids need not: leaves sit at several depths)
    leaves = sorted((p for p in range(P) if bplus and layout.leaf[p]), key=lambda p: layout.keys_of(p)[:1].tolist())
    next_leaf = {p: (leaves[i + 1] + 1 if i + 1 < len(leaves) else 0) for i, p in enumerate(leaves)}
    for p in range(P):
        ranks = layout.keys_of(p)
        keys = _key_block([codes[r] for r in ranks.tolist()], fixed)
        count = int(ranks.size)
        slots = kids.get(p, {})
        if bplus and layout.leaf[p]:
            body = (
                _PAGE.pack(LEAF, count) + keys + struct.pack("<I", next_leaf[p]) + rows[ranks].astype("<u8").tobytes()
            )
        elif bplus:
            children = np.array([slots.get(s, 0) for s in range(count + 1)], dtype="<u4")
            body = _PAGE.pack(INTERNAL, count) + keys + children.tobytes()
        else:
            children = np.array([slots.get(s, 0) for s in range(count + 1)], dtype="<u4")
            body = _PAGE.pack(CLASSIC, count) + keys + children.tobytes() + rows[ranks].astype("<u8").tobytes()
        out.append(body)
    return out


def write_index(
    path: str | os.PathLike,
    layout: Layout,
    codes: list[bytes],
    rows: np.ndarray,
    page_size: int,
    codec: str,
    key_type: str,
    table: str,
    key: str,
    predicted: float,
    replace: bool = False,
) -> Path:
    """Write ``layout`` as a paged index file, atomically; a page that does not fit its bytes is
    a :class:`SettingInvalid` (nothing is written)."""
    path = Path(path)
    if path.is_dir() or not path.parent.exists():
        raise OutputRefused(
            f"cannot write {path}: {'a directory' if path.is_dir() else 'its directory does not exist'}"
        )
    if path.exists() and not replace:
        raise OutputRefused(f"{path} exists; pass --force to replace it")
    fixed = keycodec.fixed_width(codec)
    pages = page_bytes(layout, codes, rows, fixed)
    for p, body in enumerate(pages):
        if len(body) > page_size - CHECK:
            raise SettingInvalid(
                f"tree page {p + 1} needs {len(body) + CHECK:,} bytes with its checksum, more than the "
                f"{page_size:,}-byte page "
                f"(keys longer than the sizing assumed? give --key-bytes the longest key, or a larger --page-size)"
            )
    head = _HEAD.pack(
        MAGIC,
        VERSION,
        page_size,
        1 if layout.structure == "bplus" else 0,
        0 if fixed else 1,
        fixed,
        len(pages),
        1,
        layout.n_keys,
        float(predicted),
    ) + _strings(codec, key_type, table, key)
    if len(head) > page_size - CHECK:
        raise SettingInvalid(f"the header needs {len(head) + CHECK} bytes, more than the {page_size}-byte page")
    with atomic_path(path) as tmp, open(tmp, "wb") as f:
        f.write(sealed(head, page_size))
        for body in pages:
            f.write(sealed(body, page_size))
    return path


def sealed(body: bytes, page_size: int) -> bytes:
    """A page: ``body`` padded with zeros, then the CRC-32 of everything before it (little-endian).

    CRC-32 as zlib computes it (the IEEE polynomial, in the standard library): it catches every
    single flipped bit and every burst up to 32 bits, which is what a torn or rotted page looks
    like; CRC-32C would need a package for the same guard."""
    padded = body.ljust(page_size - CHECK, b"\0")
    return padded + struct.pack("<I", zlib.crc32(padded))


def check_page(raw: bytes, number: int, path) -> None:
    """A :class:`LayoutInvalid` (exit 8) naming the page when its checksum does not match."""
    if (
        len(raw) < CHECK
        or zlib.crc32(memoryview(raw)[: len(raw) - CHECK]) != struct.unpack_from("<I", raw, len(raw) - CHECK)[0]
    ):
        what = "the header page" if number == 0 else f"page {number}"
        raise LayoutInvalid(f"{path}: {what} fails its checksum: the file is damaged; rebuild it")


def read_header(fd: int, path="the index file") -> Header:
    raw = os.pread(fd, 4096, 0)
    if len(raw) < _HEAD.size or raw[:8] != MAGIC:
        raise InputInvalid("not a paged index file written by advisor build (bad magic)")
    magic, version, page_size, structure, enc, width, pages, root, keys, predicted = _HEAD.unpack_from(raw)
    if version == 1:
        raise InputInvalid(
            f"{path} was written in format 1, which has no page checksums: rebuild it with advisor build"
        )
    if version != VERSION:
        raise InputInvalid(f"paged index format version {version} is not supported (this reader: {VERSION})")
    if not 256 <= page_size <= 1 << 20:
        raise LayoutInvalid(f"{path}: the header gives a page size of {page_size}: the file is damaged")
    raw = os.pread(fd, page_size, 0)
    if len(raw) < page_size:
        raise LayoutInvalid(f"{path}: shorter than its header page: the file is damaged")
    check_page(raw, 0, path)
    pos, strings = _HEAD.size, []
    for _ in range(4):
        (ln,) = struct.unpack_from("<H", raw, pos)
        strings.append(raw[pos + 2 : pos + 2 + ln].decode("utf-8"))
        pos += 2 + ln
    return Header(
        page_size, "bplus" if structure else "btree", width if enc == 0 else 0, pages, root, keys, predicted, *strings
    )


def checked_pages(index: PagedIndex) -> list[Page]:
    """Every tree page of an open file, in file order (file page = position + 1), each checked
    against its checksum first: the one pass that both probe and verify make over a file."""
    h = index.header
    pages = []
    for number in range(1, h.pages + 1):
        raw = os.pread(index.fd, h.page_size, number * h.page_size)
        if len(raw) < h.page_size:
            raise LayoutInvalid(f"{index.path}: ends before page {number} of {h.pages}: the file is damaged")
        check_page(raw, number, index.path)
        pages.append(parse_page(raw, h.fixed_width))
    return pages


@dataclass
class Page:
    kind: int
    keys: list[bytes]
    children: list[int]  # classic / internal
    rows: list[int]  # classic / leaf
    next_leaf: int = 0


def parse_page(raw: bytes, fixed: int) -> Page:
    kind, count = _PAGE.unpack_from(raw)
    pos = _PAGE.size
    if fixed:
        keys = [raw[pos + i * fixed : pos + (i + 1) * fixed] for i in range(count)]
        pos += count * fixed
    else:
        keys = []
        for _ in range(count):
            (ln,) = struct.unpack_from("<H", raw, pos)
            keys.append(raw[pos + 2 : pos + 2 + ln])
            pos += 2 + ln
    if kind == LEAF:
        (nxt,) = struct.unpack_from("<I", raw, pos)
        rows = np.frombuffer(raw, dtype="<u8", count=count, offset=pos + 4).tolist()
        return Page(kind, keys, [], rows, nxt)
    children = np.frombuffer(raw, dtype="<u4", count=count + 1, offset=pos).tolist()
    pos += 4 * (count + 1)
    rows = np.frombuffer(raw, dtype="<u8", count=count, offset=pos).tolist() if kind == CLASSIC else []
    return Page(kind, keys, children, rows)


class PagedIndex:
    """A built index file, searched page by page with one ``os.pread`` per page visited.

    ``get(key)`` returns the key's row number or None; ``pages_read`` counts reads from the file
    (with ``pool_pages`` = B, an LRU pool of B pages answers repeats and ``pool_misses`` counts
    the reads it could not answer)."""

    def __init__(self, path: str | os.PathLike, pool_pages: int = 0) -> None:
        self.path = Path(path)
        try:
            self.fd = os.open(self.path, os.O_RDONLY)
        except FileNotFoundError:
            raise InputNotFound(f"index file not found: {path}") from None
        try:
            self.header = read_header(self.fd, self.path)
        except Exception:
            os.close(self.fd)
            raise
        self.pool_pages = pool_pages
        self._pool: OrderedDict[int, Page] = OrderedDict()
        self.pages_read = 0
        self.pool_misses = 0
        self._map: mmap.mmap | None = None
        self._checked: set[int] = set()  # pages whose checksum was checked (each once)

    def page(self, number: int) -> Page:
        self.pages_read += 1
        if self.pool_pages:
            hit = self._pool.get(number)
            if hit is not None:
                self._pool.move_to_end(number)
                return hit
            self.pool_misses += 1
        raw = os.pread(self.fd, self.header.page_size, number * self.header.page_size)
        if number not in self._checked:
            if not 1 <= number <= self.header.pages or len(raw) < self.header.page_size:
                raise LayoutInvalid(f"{self.path}: a link points at page {number}, outside the file")
            check_page(raw, number, self.path)
            self._checked.add(number)
        page = parse_page(raw, self.header.fixed_width)
        if self.pool_pages:
            self._pool[number] = page
            if len(self._pool) > self.pool_pages:
                self._pool.popitem(last=False)
        return page

    def find(self, code: bytes) -> int | None:
        """Row number for an encoded key (see :mod:`advisor.keycodec`), or None."""
        number = self.header.root if self.header.pages else 0
        while number:
            page = self.page(number)
            if page.kind == INTERNAL:
                number = page.children[bisect.bisect_right(page.keys, code)]
                continue
            i = bisect.bisect_left(page.keys, code)
            if i < len(page.keys) and page.keys[i] == code:
                return page.rows[i]
            if page.kind == LEAF:
                return None
            number = page.children[i]
        return None

    def mapped(self) -> np.ndarray:
        """The whole file as a read-only byte array over a memory map (for the compiled reader:
        a page is read when the search first touches it, from the operating system's cache or the
        device)."""
        if self._map is None:
            size = os.fstat(self.fd).st_size
            self._map = mmap.mmap(self.fd, size, prot=mmap.PROT_READ) if size else None
        return np.frombuffer(self._map, dtype=np.uint8) if self._map is not None else np.zeros(1, dtype=np.uint8)

    def get(self, key) -> int | None:
        """Row number of ``key`` (a Python value of the key's type), or None when absent."""
        return self.find(keycodec.encode_value(self.header.codec, key))

    def close(self) -> None:
        if self._map is not None:
            try:
                self._map.close()
            except BufferError:  # an array still views it; the map closes when that is freed
                pass
            self._map = None
        if self.fd >= 0:
            os.close(self.fd)
            self.fd = -1

    def __enter__(self) -> PagedIndex:
        return self

    def __exit__(self, *exc) -> None:
        self.close()
