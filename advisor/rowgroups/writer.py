"""Write a table as a key-sorted Parquet file with chosen row groups, and read what a file's own
metadata says about its groups (the prediction ``probe`` compares DuckDB's count with).

The rows come from DuckDB sorted by key (NULL keys last) as Arrow record batches, one group
at a time, so memory holds one row group, not the table. pyarrow's ``ParquetWriter`` starts a
row group at every ``write_table`` call, which is how the boundaries are honoured exactly. The
file is written to a temporary name and renamed when complete; its key-value metadata records
the layout (key ``advisor``)."""

from __future__ import annotations

import json
import os
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..atomic import atomic_path
from ..errors import InputInvalid
from ..workload import Workload, quote, table_sql
from .sizes import chunk_sizes, footer_read

META_KEY = b"advisor"
BATCH_ROWS = 65_536


def write_groups(wl: Workload, bounds: np.ndarray, out: Path, meta: dict, writer: dict, on_group=None) -> None:
    """Stream the table sorted by key into ``out`` with groups cut at row ``bounds``."""
    import pyarrow as pa
    import pyarrow.parquet as pq

    tsql = table_sql(wl.con, wl.table)
    k = quote(wl.key)
    reader = wl.con.sql(f"SELECT * FROM {tsql} ORDER BY {k} NULLS LAST").to_arrow_reader(BATCH_ROWS)
    schema = reader.schema
    key_index = schema.get_field_index(wl.key)
    schema = schema.with_metadata({META_KEY: json.dumps(meta, default=str).encode()})
    sizes = np.diff(bounds).astype(np.int64)
    pending: list = []
    have = 0
    batches = iter(reader)
    with atomic_path(out) as tmp:
        with pq.ParquetWriter(
            str(tmp), schema, sorting_columns=[pq.SortingColumn(key_index, nulls_first=False)], **writer
        ) as w:
            for g, size in enumerate(sizes):
                while have < size:
                    batch = next(batches, None)
                    if batch is None:
                        raise InputInvalid("the table changed while it was written (fewer rows than planned)")
                    pending.append(batch)
                    have += batch.num_rows
                group = pa.Table.from_batches(pending, schema=reader.schema)
                w.write_table(group.slice(0, size).replace_schema_metadata(schema.metadata), row_group_size=int(size))
                rest = group.slice(size)
                pending = rest.to_batches() if rest.num_rows else []
                have = rest.num_rows
                if on_group:
                    on_group(g, len(sizes))
            if have or next(batches, None) is not None:
                raise InputInvalid("the table changed while it was written (more rows than planned)")


@dataclass(frozen=True)
class FileGroups:
    """A Parquet file's groups as its own footer describes them."""

    path: str
    rows: np.ndarray  # rows per group
    chunk_bytes: dict  # column -> bytes of its chunk in each group (array)
    footer_len: int
    file_bytes: int
    meta: dict  # the advisor key-value metadata ({} for files written elsewhere)
    columns: tuple[str, ...]

    def read_bytes(self, columns) -> np.ndarray:
        """Bytes one lookup reads in each group: the chunks of ``columns``."""
        return sum((self.chunk_bytes[c] for c in columns), np.zeros(self.rows.shape[0]))

    @property
    def footer_bytes(self) -> float:
        return footer_read(self.footer_len, self.file_bytes)

    @property
    def bounds(self) -> np.ndarray:
        return np.append(0, np.cumsum(self.rows)).astype(np.int64)


def read_groups(path: str | os.PathLike) -> FileGroups:
    import pyarrow.parquet as pq

    try:
        pf = pq.ParquetFile(str(path))
    except Exception as e:  # noqa: BLE001 - pyarrow raises several types for a bad file
        raise InputInvalid(f"{path} is not a readable Parquet file: {str(e).splitlines()[0]}") from None
    md = pf.metadata
    per = [chunk_sizes(md, g) for g in range(md.num_row_groups)]
    cols = tuple(pf.schema_arrow.names)
    chunk = {c: np.array([p.get(c, 0) for p in per], dtype=np.float64) for c in cols}
    raw = (pf.schema_arrow.metadata or {}).get(META_KEY)
    meta = json.loads(raw) if raw else {}
    rows = np.array([md.row_group(g).num_rows for g in range(md.num_row_groups)], dtype=np.int64)
    return FileGroups(str(path), rows, chunk, int(md.serialized_size), os.path.getsize(path), meta, cols)
