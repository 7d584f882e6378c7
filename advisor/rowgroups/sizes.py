"""What a point lookup costs in bytes on a key-sorted Parquet file, as DuckDB reads it.

The reader (measured with DuckDB 2.0.1's own profiler, ``io.total_bytes_read``, on files written
by pyarrow without a page index; see DEVELOPERS.md "Row groups"): a query ``WHERE key = v``
reads the end of the file (16 KiB, or the power of two at or above a 1,024th of the file when
that is larger: the footer's length and, when it fits, the footer itself), then the footer again
if it is longer, then for the one row group whose [min, max] holds v
the whole column chunks of the key column and of every column the query returns; a value outside
every group's range reads no chunk. Counted equals that sum to the byte on every file the tests
write. With the page index written, DuckDB 2.0.1 reads single pages of large groups instead, a
third level this model does not describe, so ``build`` writes no page index.

Planning needs the bytes of groups that do not exist yet: :func:`measure` writes a sample of the
table's own rows (three key ranges, each cut into groups of four sizes) with the same writer
settings and fits bytes = a + b * rows per column by least squares; the footer's growth per
group comes from the same sample. These figures are estimates; ``build`` and ``probe`` then use
the file's own metadata.
"""

from __future__ import annotations

import io
import math
from dataclasses import dataclass, field

import numpy as np

TAIL_READ = 16384  # the least DuckDB 2.0.1 reads from a Parquet file's end before it knows anything
SAMPLE_GROUPS = (1024, 4096, 16384, 43520)  # rows of the sample groups in each key range
WRITER = {"compression": "snappy", "write_statistics": True, "write_page_index": False}
DICTIONARY_SHARE = 0.25  # a column is dictionary-encoded when its sample has at most this share distinct


def choose_encodings(tables, key: str) -> dict:
    """Per-column encodings for the file, from the sample: a dictionary only for columns with few
    distinct values (pyarrow tries one for every column by default and, on a column of mostly
    distinct values, writes a dictionary page it then abandons: measured 1.28x the bytes of plain
    encoding on an order table). Snappy, as DuckDB and pyarrow write by default. The key keeps
    plain or dictionary encoding: with a delta or byte-stream-split encoded key, DuckDB 2.0.1
    sometimes skips the other columns of a group on a miss and sometimes not (measured; the rule
    was not found), and a model must know which. Returned as ParquetWriter keyword arguments."""
    import pyarrow as pa
    import pyarrow.compute as pc

    t = max(tables, key=lambda x: x.num_rows)
    dictionary = []
    for name in t.schema.names:
        kind = t.schema.field(name).type
        if pa.types.is_nested(kind):
            dictionary.append(name)
            continue
        try:
            distinct = pc.count_distinct(t.column(name)).as_py()
        except pa.ArrowNotImplementedError:
            dictionary.append(name)
            continue
        if t.num_rows and distinct <= DICTIONARY_SHARE * t.num_rows:
            dictionary.append(name)
    return {**WRITER, "use_dictionary": dictionary}


def tail_read(file_bytes: float) -> float:
    """Bytes DuckDB 2.0.1 reads from a file's end first: the power of two at or above a 1,024th of
    the file, at least 16 KiB, at most the file (measured on files of 3.8 MB to 147 MB: 16, 32,
    64, 128, 256 KiB, in one read operation)."""
    want = max(float(TAIL_READ), float(file_bytes) / 1024.0)
    return float(min(2.0 ** math.ceil(math.log2(want)), file_bytes))


def footer_read(footer_len: float, file_bytes: float) -> float:
    """Bytes one query spends on the footer: the tail read, plus the footer again when it does not
    fit in it (both measured)."""
    first = tail_read(file_bytes)
    return first + (footer_len if footer_len + 8 > first else 0.0)


@dataclass(frozen=True)
class ByteModel:
    """Bytes a lookup reads: ``a + b * rows`` per group read, and the footer by group count."""

    columns: tuple[str, ...]  # the columns a lookup reads (the key first)
    per_column: dict = field(default_factory=dict)  # name -> (a, b)
    footer_fixed: float = 0.0
    footer_per_group: float = 0.0
    footer_cached: bool = False
    sample_rows: int = 0
    file_bytes_hint: float = 0.0  # the file's estimated size, which sets the first read
    writer: dict = field(default_factory=dict)  # the ParquetWriter settings the sample was written with

    @property
    def a(self) -> float:
        return float(sum(self.per_column[c][0] for c in self.columns))

    @property
    def b(self) -> float:
        return float(sum(self.per_column[c][1] for c in self.columns))

    def group_bytes(self, rows) -> np.ndarray:
        return self.a + self.b * np.asarray(rows, dtype=np.float64)

    def footer_len(self, groups: int) -> float:
        return self.footer_fixed + self.footer_per_group * groups

    def footer_bytes(self, groups: int) -> float:
        """Footer bytes per lookup (0 when the reader keeps the metadata between queries)."""
        return 0.0 if self.footer_cached else footer_read(self.footer_len(groups), self.file_bytes_hint)

    def file_bytes(self, rows_per_group) -> float:
        """Estimated size of the whole file: every column's chunks plus the footer."""
        rows = np.asarray(rows_per_group, dtype=np.float64)
        every = sum(a + b * rows for a, b in self.per_column.values())
        return float(np.sum(every) + self.footer_len(len(rows)) + 12)

    def as_dict(self) -> dict:
        return {
            "columns_read": list(self.columns),
            "bytes_per_group_read": round(self.a, 1),
            "bytes_per_row": round(self.b, 3),
            "per_column": {
                c: {"bytes_per_group": round(a, 1), "bytes_per_row": round(b, 3)}
                for c, (a, b) in self.per_column.items()
            },
            "footer_bytes_fixed": round(self.footer_fixed, 1),
            "footer_bytes_per_group": round(self.footer_per_group, 1),
            "footer_cached": self.footer_cached,
            "sample_rows": self.sample_rows,
            "dictionary_columns": list(self.writer.get("use_dictionary") or []),
            "compression": self.writer.get("compression"),
            "source": "estimated from sample row groups of the table written with pyarrow (least squares)",
        }


def _fit(rows: np.ndarray, sizes: np.ndarray) -> tuple[float, float]:
    """Least squares bytes = a + b * rows with a, b >= 0."""
    if len(set(rows.tolist())) < 2:
        return 0.0, float(sizes.sum() / max(rows.sum(), 1))
    A = np.vstack([np.ones_like(rows), rows]).T
    (a, b), *_ = np.linalg.lstsq(A, sizes, rcond=None)
    if a < 0:
        a, b = 0.0, float((rows * sizes).sum() / (rows * rows).sum())
    if b < 0:
        a, b = float(sizes.mean()), 0.0
    return float(a), float(b)


def sample_metadata(tables, writer: dict) -> tuple[np.ndarray, dict, float, float]:
    """Write each Arrow table of ``tables`` as one in-memory file of the sample group sizes; return
    the groups' rows, each column's chunk sizes, and the footer's fixed and per-group bytes."""
    import pyarrow.parquet as pq

    rows, chunks, footers = [], {}, []
    for t in tables:
        cuts, at = [], 0
        for size in SAMPLE_GROUPS:
            take = min(size, t.num_rows - at)
            if take <= 0:
                break
            cuts.append((at, take))
            at += take
        for one in (False, True):
            buf = io.BytesIO()
            with pq.ParquetWriter(buf, t.schema, **writer) as w:
                for start, take in [(0, at)] if one else cuts:
                    w.write_table(t.slice(start, take), row_group_size=take)
            md = pq.ParquetFile(io.BytesIO(buf.getvalue())).metadata
            footers.append((md.num_row_groups, md.serialized_size))
            if one:
                continue
            for g in range(md.num_row_groups):
                rows.append(md.row_group(g).num_rows)
                for name, size in chunk_sizes(md, g).items():
                    chunks.setdefault(name, []).append(size)
    g = np.array([f[0] for f in footers], dtype=np.float64)
    size = np.array([f[1] for f in footers], dtype=np.float64)
    fixed, per = _fit(g, size)
    return np.array(rows, dtype=np.float64), {c: np.array(v, dtype=np.float64) for c, v in chunks.items()}, fixed, per


def chunk_sizes(md, g: int) -> dict[str, int]:
    """Compressed bytes of each top-level column's chunks in row group ``g`` (the parts of a
    nested column summed)."""
    out: dict[str, int] = {}
    rg = md.row_group(g)
    for c in range(rg.num_columns):
        col = rg.column(c)
        name = col.path_in_schema.split(".")[0]
        out[name] = out.get(name, 0) + col.total_compressed_size
    return out


def fit_model(tables, columns: tuple[str, ...], footer_cached: bool) -> ByteModel:
    writer = choose_encodings(tables, columns[0])
    rows, chunks, fixed, per = sample_metadata(tables, writer)
    per_column = {c: _fit(rows, s) for c, s in chunks.items()}
    missing = [c for c in columns if c not in per_column]
    if missing:  # a column with no chunk of its own name (nested types): its parts summed
        raise ValueError(f"no column chunks found for {missing}")
    return ByteModel(columns, per_column, fixed, per, footer_cached, int(rows.sum()), writer=writer)
