"""The user's existing index, costed exactly on the same lookups (``--current sqlite:PATH:INDEX``).

An SQLite index is read from its file by the published format (:mod:`advisor.sqlite_tree`) and
costed with the end-of-search rule that engine follows (:mod:`advisor.leaf_search`: its seek
always lands in a leaf), so the figure is what that index reads, beside the even split and the
advice. The index must hold exactly the table's distinct keys (one entry each, integer keys).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from .errors import InputInvalid, InputNotFound, LayoutInvalid, SettingInvalid
from .histogram import Histogram
from .layout import check_layout, evaluate
from .leaf_search import evaluate_leaf_search
from .sqlite_tree import index_layout, sqlite_page_size


def parse_current(spec: str) -> tuple[Path, str]:
    """``sqlite:PATH:INDEX`` -> (path, index name); the path may itself hold colons."""
    kind, sep, rest = spec.partition(":")
    path, sep2, index = rest.rpartition(":")
    if kind != "sqlite" or not sep or not sep2 or not path or not index:
        raise SettingInvalid(f"--current takes sqlite:PATH:INDEX (an SQLite file and an index in it), got {spec!r}")
    if not Path(path).is_file():
        raise InputNotFound(f"SQLite database not found: {path}")
    return Path(path), index


def current_figures(spec: str, hist: Histogram, table_keys: np.ndarray) -> dict:
    """The existing index's size and expected page reads on ``hist`` (the run's histogram over
    ``table_keys``, the table's distinct keys in ascending order)."""
    path, index = parse_current(spec)
    if not np.issubdtype(np.asarray(table_keys).dtype, np.integer):
        raise InputInvalid("--current compares integer keys; the table's key column is not an integer type")
    page_size = sqlite_page_size(path)
    layout, keys, _pages = index_layout(path, index)
    if keys.size != table_keys.size or not np.array_equal(keys, np.asarray(table_keys, dtype=np.int64)):
        raise InputInvalid(
            f"the SQLite index {index!r} holds {keys.size:,} distinct keys and the table {table_keys.size:,}; "
            "--current needs an index over the same keys"
        )
    try:
        check_layout(layout)
    except LayoutInvalid:
        raise InputInvalid(
            f"the SQLite index {index!r} holds a key more than once; --current costs a unique index"
        ) from None
    cost = evaluate(layout, hist)
    return {
        "source": "sqlite",
        "path": str(path),
        "index": index,
        "page_size": page_size,
        "pages": int(cost.pages),
        "bytes": int(cost.pages) * page_size,
        "height": int(cost.height),
        "expected_page_reads": evaluate_leaf_search(layout, hist),
        "expected_page_reads_stopping_at_interior_match": float(cost.expected_page_reads),
        "end_of_search": "every search ends in a leaf (this engine's index seek)",
    }
