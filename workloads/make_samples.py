"""Write the recipe samples from the demo's own lending desk, so every recipe gives a real report
on the database `advisor demo` builds (seed 7, 200,000 packets: the defaults).

Run from the project root:  .venv/bin/python workloads/make_samples.py
The samples are invented (the demo scenario, no real data): the first lookups of the demo's
`desk_lookups` table (its skew, its 6% misses), dressed as each kind of log. Seeded: running it
again writes the same files. `tests/test_workloads.py` counts each sample without the recipes
and checks the recipes against those counts and DuckDB's own join counts.
"""

from __future__ import annotations

import datetime as dt
import json
import tempfile
from pathlib import Path

import duckdb
import numpy as np

from advisor.demo import DEMO_LOG, build_demo

HERE = Path(__file__).resolve().parent
START = dt.datetime(2026, 11, 1, 8, 0, 0)


def desk_values(n: int) -> list[int]:
    """The first ``n`` non-NULL packet numbers the demo's lending desk looked up, in order."""
    with tempfile.TemporaryDirectory() as tmp:
        con = duckdb.connect(str(build_demo(tmp)), read_only=True)
        rows = con.execute(
            f"SELECT packet_no FROM {DEMO_LOG} WHERE packet_no IS NOT NULL ORDER BY lookup_seq LIMIT {n}"
        ).fetchall()
        con.close()
    return [int(r[0]) for r in rows]


def app_log(values: list[int], rng: np.random.Generator) -> None:
    at = START
    lines = []
    for v in values:
        at += dt.timedelta(seconds=int(rng.integers(1, 4)))
        if rng.random() < 0.02:  # a health check: no packet, not a lookup
            lines.append({"at": f"{at:%Y-%m-%dT%H:%M:%SZ}", "route": "health", "ms": 1})
        desk = int(rng.integers(1, 4))
        entry = {"packet": v, "desk": desk}
        lines.append(
            {"at": f"{at:%Y-%m-%dT%H:%M:%SZ}", "route": "lend", "request": entry, "ms": int(rng.integers(1, 9))}
        )
    (HERE / "app-log" / "requests.jsonl").write_text("".join(json.dumps(x) + "\n" for x in lines))


def sql_log(values: list[int], rng: np.random.Generator) -> None:
    at, i, lines = START, 0, []
    while i < len(values):
        at += dt.timedelta(seconds=int(rng.integers(1, 3)))
        t = f"{at:%Y-%m-%d %H:%M:%S}"
        roll = rng.random()
        if roll < 0.08:  # another table: not a lookup of packets
            lines.append(f"{t} SELECT name FROM desks WHERE desk_id = {int(rng.integers(1, 9))};")
            continue
        if roll < 0.20:  # a list: one lookup per value
            k = int(rng.integers(2, 5))
            chunk = values[i : i + k]
            i += len(chunk)
            lines.append(f"{t} SELECT shelf FROM packets WHERE packet_no IN ({', '.join(map(str, chunk))});")
        elif roll < 0.25:  # a range scan over the next few hundred numbers
            v = values[i]
            i += 1
            lines.append(f"{t} SELECT * FROM packets WHERE packet_no BETWEEN {v} AND {v + int(rng.integers(50, 400))};")
        else:
            v = values[i]
            i += 1
            form = ["packet_no = {}", "packet_no={}", "PACKET_NO = {}"][int(rng.integers(0, 3))]
            lines.append(f"{t} SELECT shelf FROM packets WHERE {form.format(v)};")
    (HERE / "sql-log" / "statements.log").write_text("\n".join(lines) + "\n")


def access_log(values: list[int], rng: np.random.Generator, known: set[int]) -> None:
    at, lines = START, []
    for v in values:
        at += dt.timedelta(seconds=int(rng.integers(1, 3)))
        stamp = f"[{at:%d/%b/%Y:%H:%M:%S} +0000]"
        ip = f"10.0.0.{int(rng.integers(2, 60))}"
        if rng.random() < 0.05:  # a static file: not a lookup
            lines.append(f'{ip} - - {stamp} "GET /static/logo.png HTTP/1.1" 200 2048')
        status = 200 if v in known else 404
        if rng.random() < 0.7:
            tail = ["", "/shelf", "/history"][int(rng.integers(0, 3))]
            url = f"/packets/{v}{tail}"
        else:
            url = f"/search?packet={v}&desk={int(rng.integers(1, 4))}"
        lines.append(f'{ip} - - {stamp} "GET {url} HTTP/1.1" {status} {int(rng.integers(60, 900))}')
    (HERE / "access-log" / "access.log").write_text("\n".join(lines) + "\n")


def counts(values: list[int]) -> None:
    half = len(values) // 2
    con = duckdb.connect()
    for day, part in (("2026-11-01", values[:half]), ("2026-11-02", values[half:])):
        folder = HERE / "counts" / f"day={day}"
        folder.mkdir(parents=True, exist_ok=True)
        con.register("v", {"packet_no": np.asarray(part, dtype=np.int64)})
        con.execute(
            f"COPY (SELECT packet_no, count(*)::BIGINT AS n FROM v GROUP BY packet_no ORDER BY packet_no) "
            f"TO '{folder / 'part-0.parquet'}' (FORMAT parquet)"
        )
        con.unregister("v")
    con.close()


def main() -> None:
    rng = np.random.default_rng(2026)
    values = desk_values(20_000)
    with tempfile.TemporaryDirectory() as tmp:
        con = duckdb.connect(str(build_demo(tmp)), read_only=True)
        known = {int(r[0]) for r in con.execute("SELECT packet_no FROM packets").fetchall()}
        con.close()
    app_log(values[:3000], rng)
    sql_log(values[3000:5500], rng)
    access_log(values[5500:8000], rng, known)
    counts(values)


if __name__ == "__main__":
    main()
