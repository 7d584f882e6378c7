"""Check an index file end to end: every page's checksum, then the tree's invariants.

A reader trusts what a page says; this is what makes that safe. In file order, every page's
CRC-32 (:func:`advisor.pagefile.check_page`); then, walking the tree from the root with the key
range each page may hold:

* kinds: a classic file holds classic pages only; a B+ file internal pages above leaves;
* links: each child number names a page of the file, every page but the root is linked once,
  and every page is reached;
* order: keys strictly increase within a page and across the whole walk, each inside the range
  its parent gives (classic: between the neighbouring keys; B+: separator <= key < next one);
* the leaf chain (B+): each leaf's next-leaf number names the leaf the walk meets next, the
  last one 0;
* the count: the keys found equal the header's count.

The first problem found is raised as a :class:`LayoutInvalid` naming the page (exit 8).
"""

from __future__ import annotations

import os

from .errors import LayoutInvalid
from .pagefile import CLASSIC, INTERNAL, LEAF, PagedIndex, checked_pages


def verify_file(path: str | os.PathLike) -> dict:
    """Every check above on the file at ``path``; its figures when all pass."""
    with PagedIndex(path) as index:
        h = index.header
        pages = dict(enumerate(checked_pages(index), start=1))
        if os.fstat(index.fd).st_size != (h.pages + 1) * h.page_size:
            raise LayoutInvalid(f"{path}: {os.fstat(index.fd).st_size:,} bytes, not {h.pages + 1} pages")
    walk = _Walk(pages, h.structure, path)
    if h.pages:
        walk.visit(1, None, None, 1)
    unreached = sorted(set(pages) - walk.seen)
    if unreached:
        raise LayoutInvalid(f"{path}: page {unreached[0]} is linked from no page")
    if walk.keys != h.keys:
        raise LayoutInvalid(f"{path}: the tree holds {walk.keys:,} keys, the header says {h.keys:,}")
    if h.structure == "bplus":
        for here, there in zip(walk.leaves, walk.leaves[1:] + [0], strict=True):
            if pages[here].next_leaf != there:
                raise LayoutInvalid(f"{path}: page {here}'s next-leaf link is {pages[here].next_leaf}, not {there}")
    return {"path": str(path), "pages": h.pages, "keys": h.keys, "height": walk.height, "structure": h.structure}


class _Walk:
    def __init__(self, pages: dict, structure: str, path) -> None:
        self.pages, self.bplus, self.path = pages, structure == "bplus", path
        self.seen: set[int] = set()
        self.last: bytes | None = None  # the greatest key met so far
        self.keys = 0
        self.leaves: list[int] = []
        self.height = 0

    def fail(self, number: int, what: str) -> None:
        raise LayoutInvalid(f"{self.path}: page {number} {what}")

    def visit(self, number: int, low: bytes | None, high: bytes | None, depth: int) -> None:
        """Page ``number`` and its subtree, whose keys must lie in [low, high) for B+ and
        (low, high) for classic pages (None: unbounded)."""
        if number in self.seen:
            self.fail(number, "is linked twice")
        self.seen.add(number)
        self.height = max(self.height, depth)
        page = self.pages[number]
        want = (INTERNAL, LEAF) if self.bplus else (CLASSIC,)
        if page.kind not in want:
            self.fail(number, f"has kind {page.kind}, not one this {'B+' if self.bplus else 'classic'} file holds")
        keys = page.keys
        if any(a >= b for a, b in zip(keys, keys[1:], strict=False)):
            self.fail(number, "holds keys out of order")
        if keys and ((low is not None and keys[0] < low) or (high is not None and keys[-1] >= high)):
            self.fail(number, "holds a key outside the range its parent gives it")
        if page.kind == LEAF:
            self._keys(number, keys)
            self.leaves.append(number)
            return
        for child in page.children:
            if child and not 1 <= child <= len(self.pages):
                self.fail(number, f"links to page {child}, outside the file")
        bounds = [low, *keys, high]
        for i, child in enumerate(page.children):
            if page.kind == CLASSIC and i > 0:
                self._keys(number, [keys[i - 1]])
            if child:
                lo = bounds[i]
                if page.kind == CLASSIC and lo is not None:
                    lo = lo + b"\0"  # strictly above the key on the left: the least code greater than it
                self.visit(child, lo, bounds[i + 1], depth + 1)
            elif page.kind == INTERNAL:
                self.fail(number, f"has an empty child slot {i}")

    def _keys(self, number: int, keys: list[bytes]) -> None:
        for k in keys:
            if self.last is not None and k <= self.last:
                self.fail(number, "breaks the key order across pages")
            self.last = k
            self.keys += 1
