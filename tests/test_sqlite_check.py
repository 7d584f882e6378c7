"""The cost model against a real engine: SQLite's own index tree, read from its file, costed by
the evaluator, and page reads counted in the engine for the same lookups.

The tree is read by following SQLite's published "Database File Format" document (file header,
b-tree page header, cell pointer array, interior cells with left-child page numbers, record
format; see ``advisor/sqlite_tree.py``). Reads are counted through a VFS of ``apsw`` (a
general-purpose SQLite wrapper, a test dependency) that records every page the engine reads, with
a fresh connection per lookup so the engine's page cache hides nothing.

Finding (measured here, and the reason for the second end-of-search rule): SQLite's equality seek
always lands in a leaf, also for keys held in interior cells, so its reads equal the leaf rule
(:func:`advisor.layout.evaluate_leaf_search`) exactly, while the classic rule (stop at the page
holding the key) predicts fewer for those keys, by at most their share of lookups times the
height. The classic figures therefore apply to engines whose search stops at an interior match.
"""

from __future__ import annotations

import sqlite3

import numpy as np
import pytest

from advisor.histogram import Histogram
from advisor.layout import check_layout, evaluate
from advisor.leaf_search import evaluate_leaf_search
from advisor.sqlite_tree import index_layout

apsw = pytest.importorskip("apsw")


class _CountingFile(apsw.VFSFile):
    def __init__(self, vfs, name, flags, log, page_size):
        super().__init__("", name, flags)
        self.log, self.page_size = log, page_size

    def xRead(self, amount, offset):  # noqa: N802 - apsw's method name
        self.log.append(offset // self.page_size + 1)
        return super().xRead(amount, offset)


class _CountingVFS(apsw.VFS):
    def __init__(self, log, page_size):
        self.log, self.page_size = log, page_size
        super().__init__("advisor-counting", "")

    def xOpen(self, name, flags):  # noqa: N802 - apsw's method name
        return _CountingFile(self, name, flags, self.log, self.page_size)


@pytest.fixture(scope="module")
def sqlite_index(tmp_path_factory):
    path = tmp_path_factory.mktemp("sqlite") / "real.db"
    con = sqlite3.connect(path)
    con.execute("PRAGMA page_size = 1024")
    con.execute("CREATE TABLE t (k INTEGER)")
    con.executemany("INSERT INTO t VALUES (?)", [(int(k),) for k in np.arange(0, 60_000, 3)])
    # UNIQUE: an equality seek stops after its match (on a non-unique index the engine also reads the
    # next entry to see whether it still matches, which costs one more leaf after a leaf's last entry)
    con.execute("CREATE UNIQUE INDEX idx ON t (k)")
    con.commit()
    con.close()
    return path


def test_model_matches_sqlite_page_reads(sqlite_index):
    layout, keys, index_pages = index_layout(sqlite_index, "idx")
    check_layout(layout)
    height = int(layout.depths().max())
    assert keys.size == 20_000 and height >= 3
    rng = np.random.default_rng(0)
    inner = np.unique(layout.parent[1:])
    inner_keys = np.concatenate([layout.keys_of(page) for page in inner])  # keys held in interior pages
    # random hits, random misses, and 40 keys of interior pages (where the two rules differ)
    looked = np.concatenate([rng.choice(keys, 300), rng.integers(-10, 60_010, 60), keys[inner_keys[:40]]])
    log: list[int] = []
    vfs = _CountingVFS(log, 1024)  # registered with SQLite under its name while referenced
    counted = []
    for value in looked.tolist():
        con = apsw.Connection(str(sqlite_index), flags=apsw.SQLITE_OPEN_READONLY, vfs="advisor-counting")
        del log[:]
        list(con.execute("SELECT k FROM t INDEXED BY idx WHERE k = ?", (value,)))
        counted.append(len({p for p in log if p in index_pages}))
        assert vfs is not None
        con.close()
    # the same lookups as a histogram over the index's keys and gaps
    pos = np.searchsorted(keys, looked)
    hit = (pos < keys.size) & (keys[np.minimum(pos, keys.size - 1)] == looked)
    p = np.bincount(pos[hit], minlength=keys.size).astype(float)
    q = np.bincount(pos[~hit], minlength=keys.size + 1).astype(float)
    hist = Histogram(p, q)
    counted_mean = float(np.mean(counted))
    assert evaluate_leaf_search(layout, hist) == pytest.approx(counted_mean, abs=1e-12)
    classic = evaluate(layout, hist).expected_page_reads
    interior_hits = float(p[inner_keys].sum())
    assert classic <= counted_mean + 1e-12
    if interior_hits > 0:  # the finding: SQLite does not stop at an interior match
        assert classic < counted_mean
    assert counted_mean - classic <= height * interior_hits / hist.total + 1e-12
