"""Order-preserving byte codes for keys: comparing codes as bytes compares keys in DuckDB's order.

* ``int8`` .. ``int64``: signed integers at the type's own width (DATE as int32 days,
  TIMESTAMP as int64 microseconds since 1970), big-endian with the sign bit flipped;
* ``uint8`` .. ``uint64``: unsigned, big-endian;
* ``float32`` / ``float64``: IEEE floats: positives with the sign bit set, negatives with every
  bit inverted (the usual trick; NaN sorts last, as in DuckDB);

Fixed-width codes are as wide as DuckDB stores the type, so pages sized by the geometry formula
hold them.
* ``utf8``: strings as their UTF-8 bytes, length-prefixed in pages (DuckDB compares VARCHAR
  by bytes).

The SQL side (:func:`sql_value`) turns a column of the key's type into the value the codec
encodes, so the table's keys and a log's probes are encoded the same way.
"""

from __future__ import annotations

import datetime as dt
import struct

from .errors import InputInvalid

SIGNED = {"TINYINT", "SMALLINT", "INTEGER", "BIGINT"}
UNSIGNED = {"UTINYINT", "USMALLINT", "UINTEGER", "UBIGINT"}
FLOATS = {"FLOAT", "DOUBLE", "REAL"}
TIMESTAMPS = {"TIMESTAMP", "TIMESTAMP_S", "TIMESTAMP_MS", "TIMESTAMP WITH TIME ZONE"}
STRINGS = {"VARCHAR"}
EPOCH = dt.date(1970, 1, 1)


WIDTH = {
    "TINYINT": 8,
    "SMALLINT": 16,
    "INTEGER": 32,
    "BIGINT": 64,
    "UTINYINT": 8,
    "USMALLINT": 16,
    "UINTEGER": 32,
    "UBIGINT": 64,
}


def codec_for(key_type: str) -> str:
    t = key_type.upper()
    if t in SIGNED:
        return f"int{WIDTH[t]}"
    if t in UNSIGNED:
        return f"uint{WIDTH[t]}"
    if t == "DATE":
        return "int32"
    if t in TIMESTAMPS:
        return "int64"
    if t in FLOATS:
        return "float32" if t in ("FLOAT", "REAL") else "float64"
    if t in STRINGS:
        return "utf8"
    raise InputInvalid(
        f"building an index file supports integer, floating-point, DATE, TIMESTAMP and VARCHAR keys, not {key_type}"
    )


def fixed_width(codec: str) -> int:
    if codec == "utf8":
        return 0
    return int(codec.lstrip("uintfloa")) // 8


def sql_value(key_type: str, expr: str) -> str:
    """SQL turning ``expr`` (of the key's type) into the value :func:`encode` takes."""
    t = key_type.upper()
    # infinities sort beyond every finite value (as in DuckDB): coded as the type's extremes,
    # which is how DuckDB stores them (int32 / int64 max, and its negation)
    if t == "DATE":
        return (
            f"CASE WHEN isinf({expr}) THEN (CASE WHEN {expr} > DATE '1970-01-01' THEN 2147483647 ELSE -2147483647 END)"
            f" ELSE ({expr} - DATE '1970-01-01') END::BIGINT"
        )
    if t in TIMESTAMPS:
        return (
            f"CASE WHEN isinf({expr}::TIMESTAMP) THEN (CASE WHEN {expr}::TIMESTAMP > TIMESTAMP '1970-01-01' "
            f"THEN 9223372036854775807 ELSE -9223372036854775807 END) ELSE epoch_us({expr}::TIMESTAMP) END"
        )
    if t in FLOATS:
        return f"({expr})::DOUBLE"
    if t in STRINGS:
        return f"({expr})::VARCHAR"
    return f"({expr})::{'UBIGINT' if t in UNSIGNED else 'BIGINT'}"


def encode(codec: str, value) -> bytes:
    """Code of a value as :func:`sql_value` returns it."""
    if codec == "utf8":
        return str(value).encode("utf-8")
    width = fixed_width(codec)
    bits = 8 * width
    if codec.startswith("int"):
        return ((int(value) + (1 << (bits - 1))) & ((1 << bits) - 1)).to_bytes(width, "big")
    if codec.startswith("uint"):
        return int(value).to_bytes(width, "big")
    if codec.startswith("float"):
        fmt, ufmt = (">f", ">I") if width == 4 else (">d", ">Q")
        (raw,) = struct.unpack(ufmt, struct.pack(fmt, float(value)))
        raw = raw ^ ((1 << bits) - 1) if raw >> (bits - 1) else raw | (1 << (bits - 1))
        return raw.to_bytes(width, "big")
    raise InputInvalid(f"unknown key codec {codec!r}")


def encode_value(codec: str, value) -> bytes:
    """Code of a Python value of the key's own type (int, float, str, date, datetime)."""
    if codec.startswith("int") and isinstance(value, dt.datetime):
        base = dt.datetime(1970, 1, 1, tzinfo=value.tzinfo)
        delta = value - base
        return encode(codec, (delta.days * 86_400 + delta.seconds) * 1_000_000 + delta.microseconds)
    if codec.startswith("int") and isinstance(value, dt.date):
        return encode(codec, (value - EPOCH).days)
    return encode(codec, value)
