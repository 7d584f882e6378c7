"""Parquet row groups end to end, checked against things outside the project: pyarrow's reading of
the file's footer (row-group boundaries, min/max statistics; Apache Parquet "File Format"), DuckDB's
query results on the built file against the table (EXCEPT ALL both ways), and the bytes DuckDB's own
profiler counts per query against the prediction from the file's metadata."""

from __future__ import annotations

import json

import duckdb
import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq
import pytest
from typer.testing import CliRunner

from advisor.cli import app

runner = CliRunner()
KEYS = 40_000


def _db(path, dup: int = 1, nulls: int = 0, scattered: bool = False, seed: int = 3):
    con = duckdb.connect(str(path))
    con.execute(
        f"CREATE TABLE orders AS SELECT (i // {dup})::BIGINT AS order_id, 'c' || (i * 7919 % 5000)::VARCHAR AS who, "
        f"(i % 97) * 1.5 AS amount FROM range({KEYS * dup}) t(i)"
    )
    if nulls:
        con.execute(f"INSERT INTO orders SELECT NULL, 'nobody', 0 FROM range({nulls})")
    rng = np.random.default_rng(seed)
    z = rng.zipf(1.1, 60_000)
    z = z[z <= KEYS]
    ids = rng.permutation(KEYS)[z - 1] if scattered else KEYS - z
    miss = rng.random(ids.shape[0]) < 0.1
    vals = np.where(miss, ids * 10 + 5 - 10 * KEYS // 2, ids)  # misses inside and outside the key range
    log = pa.table({"order_id": vals[:20_000].astype(np.int64), "seq": np.arange(min(20_000, vals.shape[0]))})
    con.register("log_rows", log)
    con.execute("CREATE TABLE lookups AS SELECT * FROM log_rows")
    con.close()
    return str(path)


def _cli(*args) -> tuple[int, str, str]:
    r = runner.invoke(app, [str(a) for a in args])
    return r.exit_code, r.stdout, r.stderr


COMMON = ("--table", "orders", "--key", "order_id", "--log", "lookups", "--row-group-rows", "5000")
SMALL = ("--min-group-rows", "200")


@pytest.fixture(scope="module")
def clustered(tmp_path_factory):
    return _db(tmp_path_factory.mktemp("rg") / "clustered.duckdb")


def _stats(path):
    md = pq.ParquetFile(path).metadata
    out = []
    for g in range(md.num_row_groups):
        st = md.row_group(g).column(0).statistics
        assert st is not None and st.has_min_max, "min/max statistics missing"
        out.append((md.row_group(g).num_rows, st.min, st.max))
    return out


def test_recommend_json_within_budget_and_proven(clustered):
    code, out, err = _cli("recommend", clustered, *COMMON, *SMALL, "--model", "parquet", "--json")
    assert code == 0, err
    run = json.loads(out)
    plan = run["plans"][0]
    assert plan["optimized"]["row_groups"] <= plan["budget"]["max_row_groups"] == 8  # ceil(40,000 / 5,000)
    assert plan["proven_optimal"]
    assert plan["optimized"]["expected_bytes"] <= plan["uniform"]["expected_bytes"]
    assert plan["lower_bound"] <= plan["optimized"]["expected_bytes"] * (1 + 1e-9)
    reads = [p["expected_bytes"] for p in run["frontier"]]
    assert reads == sorted(reads, reverse=True)  # more groups never read more
    assert run["lookups"] == 20_000 and run["hits"] + run["misses"] == 20_000
    assert len(run["advised_first_keys"]) == plan["optimized"]["row_groups"]


def test_build_advised_file_matches_plan_and_table(clustered, tmp_path):
    code, out, err = _cli("recommend", clustered, *COMMON, *SMALL, "--model", "parquet", "--json", "--no-frontier")
    first_keys = json.loads(out)["advised_first_keys"]
    f = tmp_path / "adv.parquet"
    code, out, err = _cli("build", clustered, *COMMON, *SMALL, "--model", "parquet", "--out", f, "--json")
    assert code == 0, err
    summary = json.loads(out)
    stats = _stats(f)
    # pyarrow's reading of the footer: the groups start at the advised first keys, sorted, disjoint
    assert [s[1] for s in stats] == first_keys
    assert all(a[2] < b[1] for a, b in zip(stats, stats[1:], strict=False))
    assert summary["rows"] == sum(s[0] for s in stats) == KEYS
    assert pq.ParquetFile(f).metadata.num_row_groups <= 8
    con = duckdb.connect(clustered, read_only=True)
    diff = con.execute(
        f"SELECT count(*) FROM ((SELECT * FROM orders EXCEPT ALL SELECT * FROM read_parquet('{f}')) "
        f"UNION ALL (SELECT * FROM read_parquet('{f}') EXCEPT ALL SELECT * FROM orders))"
    ).fetchall()[0][0]
    assert diff == 0
    meta = json.loads(pq.ParquetFile(f).schema_arrow.metadata[b"advisor"])
    assert meta["layout"] == "advised" and meta["key"] == "order_id"


def test_probe_counts_equal_prediction_and_advised_reads_less(clustered, tmp_path):
    got = {}
    for layout in ("even", "advised"):
        f = tmp_path / f"{layout}.parquet"
        code, out, err = _cli("build", clustered, *COMMON, *SMALL, "--model", "parquet", "--out", f, "--layout", layout)
        assert code == 0, err
        code, out, err = _cli("probe", f, clustered, "--log", "lookups", "--limit", "400", "--json")
        assert code == 0, err
        res = json.loads(out)
        assert res["wrong_rows"] == 0
        assert res["lookups"] == 400
        assert res["bytes_per_lookup"] == pytest.approx(res["predicted_bytes_per_lookup"], rel=0.02)
        got[layout] = res
    assert got["even"]["found"] == got["advised"]["found"]  # the same sample, the same answers
    assert got["advised"]["bytes_per_lookup"] * 1.5 < got["even"]["bytes_per_lookup"]


def test_scattered_advice_never_reads_more(tmp_path):
    db = _db(tmp_path / "scattered.duckdb", scattered=True)
    code, out, err = _cli("recommend", db, *COMMON, *SMALL, "--model", "parquet", "--json", "--no-frontier")
    assert code == 0, err
    plan = json.loads(out)["plans"][0]
    assert plan["optimized"]["expected_bytes"] <= plan["uniform"]["expected_bytes"]


def test_repeated_keys_are_never_split_and_null_keys_kept(tmp_path):
    db = _db(tmp_path / "dup.duckdb", dup=3, nulls=50)
    f = tmp_path / "dup.parquet"
    code, out, err = _cli("build", db, *COMMON, *SMALL, "--model", "parquet", "--out", f, "--json")
    assert code == 0, err
    stats = _stats(f)
    assert all(a[2] < b[1] for a, b in zip(stats, stats[1:], strict=False))  # one value's rows in one group
    assert sum(s[0] for s in stats) == 3 * KEYS + 50
    con = duckdb.connect(db, read_only=True)
    assert con.execute(f"SELECT count(*) FROM read_parquet('{f}') WHERE order_id IS NULL").fetchall()[0][0] == 50
    code, out, err = _cli("probe", f, db, "--log", "lookups", "--limit", "200", "--json")
    res = json.loads(out)
    assert code == 0 and res["wrong_rows"] == 0
    assert res["bytes_per_lookup"] == pytest.approx(res["predicted_bytes_per_lookup"], rel=0.02)


def test_even_file_splits_values_and_model_counts_both_groups(tmp_path):
    """An even cut every 5,000 rows splits a value with 3 rows across two groups: the prediction
    counts both groups and DuckDB reads both."""
    db = _db(tmp_path / "dup2.duckdb", dup=3)
    f = tmp_path / "even.parquet"
    code, out, err = _cli("build", db, *COMMON, "--model", "parquet", "--out", f, "--layout", "even")
    assert code == 0, err
    code, out, err = _cli("probe", f, db, "--log", "lookups", "--limit", "300", "--json")
    res = json.loads(out)
    assert res["bytes_per_lookup"] == pytest.approx(res["predicted_bytes_per_lookup"], rel=0.02)


def test_bad_inputs_are_one_line_errors(clustered, tmp_path):
    f = tmp_path / "x.parquet"
    f.write_bytes(b"")
    code, out, err = _cli("build", clustered, *COMMON, "--model", "parquet", "--out", f)
    assert code == 7 and "exists" in err and len(err.strip().splitlines()) == 1
    code, out, err = _cli("recommend", clustered, *COMMON, "--model", "parquet", "--max-row-groups", "zero")
    assert code == 5 and len(err.strip().splitlines()) == 1
    code, out, err = _cli("recommend", clustered, *COMMON, "--model", "parquet", "--columns", "nope")
    assert code == 3 and "nope" in err
    code, out, err = _cli(
        "recommend", clustered, *COMMON, "--model", "parquet", "--min-group-rows", "30000", "--max-row-groups", "1"
    )
    assert code == 0  # one group always fits
    code, out, err = _cli("recommend", clustered, *COMMON, "--model", "parquet", "--min-group-rows", "50000")
    assert code == 0  # a table smaller than the minimum is one group


def test_probe_of_a_file_written_elsewhere(clustered, tmp_path):
    f = tmp_path / "copy.parquet"
    con = duckdb.connect(clustered, read_only=True)
    con.execute(f"COPY (SELECT * FROM orders ORDER BY order_id) TO '{f}' (FORMAT parquet, ROW_GROUP_SIZE 8192)")
    con.close()
    code, out, err = _cli("probe", f, clustered, "--log", "lookups", "--limit", "100")
    assert code == 5 and "--table" in err and len(err.strip().splitlines()) == 1
    code, out, err = _cli(
        "probe", f, clustered, "--log", "lookups", "--limit", "200", "--table", "orders", "--key", "order_id", "--json"
    )
    assert code == 0, err
    res = json.loads(out)
    assert res["wrong_rows"] == 0 and res["lookups"] == 200


@pytest.mark.parametrize("rows", [200_000, 1_100_000])
def test_reader_model_matches_duckdb_profiler(tmp_path, rows):
    """DuckDB's first read grows with the file (16 KiB up to 16 MiB files, then the power of two at
    or above a 1,024th of the file); the footer read and a group's chunks equal its count."""
    from advisor.rowgroups.sizes import footer_read
    from advisor.rowgroups.writer import read_groups

    rng = np.random.default_rng(1)
    t = pa.table({"k": np.arange(rows, dtype=np.int64), "x": rng.integers(0, 2**62, rows)})
    f = tmp_path / "t.parquet"
    pq.write_table(t, f, compression="none", row_group_size=rows // 4, write_page_index=False, use_dictionary=False)
    groups = read_groups(f)
    con = duckdb.connect()
    prof = tmp_path / "prof.json"
    con.execute("PRAGMA enable_profiling = 'json'")
    con.execute(f"SET profiling_output = '{prof}'")

    def counted(v):
        con.execute(f"SELECT * FROM read_parquet('{f}') WHERE k = {v}").fetchall()
        return json.loads(prof.read_text())["io"]["total_bytes_read"]

    footer = footer_read(groups.footer_len, groups.file_bytes)
    assert counted(-5) == footer
    assert counted(rows // 4 + 3) == footer + groups.read_bytes(["k", "x"])[1]


@pytest.mark.parametrize(
    "key_sql",
    ["'sku-' || lpad(i::VARCHAR, 6, '0')", "DATE '1950-01-01' + i::INTEGER", "(i * 0.5)::DOUBLE", "i::INTEGER"],
)
def test_key_types_build_and_probe(tmp_path, key_sql):
    """Keys of other types: the file equals the table and DuckDB's counted bytes equal the
    prediction (a string key is dictionary- or plain-encoded, an integer key delta-encoded)."""
    db = str(tmp_path / "types.duckdb")
    con = duckdb.connect(db)
    con.execute(f"CREATE TABLE items AS SELECT {key_sql} AS k, i % 7 AS x FROM range(12000) t(i)")
    con.execute(
        "CREATE TABLE lookups AS SELECT k FROM items, range(3) r(j) WHERE hash(k) % 10 = 0 "
        "UNION ALL SELECT k FROM items WHERE hash(k) % 50 = 1 "
        "UNION ALL SELECT k FROM (SELECT k FROM items ORDER BY k DESC LIMIT 300), range(20) r(j)"
    )
    con.close()
    f = tmp_path / "t.parquet"
    args = ("--table", "items", "--key", "k", "--log", "lookups", "--row-group-rows", "3000", "--min-group-rows", "100")
    code, out, err = _cli("build", db, *args, "--model", "parquet", "--out", f, "--json")
    assert code == 0, err
    con = duckdb.connect(db, read_only=True)
    diff = con.execute(
        f"SELECT count(*) FROM ((SELECT * FROM items EXCEPT ALL SELECT * FROM read_parquet('{f}')) "
        f"UNION ALL (SELECT * FROM read_parquet('{f}') EXCEPT ALL SELECT * FROM items))"
    ).fetchall()[0][0]
    assert diff == 0
    code, out, err = _cli("probe", f, db, "--log", "lookups", "--limit", "200", "--json")
    assert code == 0, err
    res = json.loads(out)
    assert res["wrong_rows"] == 0
    assert res["bytes_per_lookup"] == pytest.approx(res["predicted_bytes_per_lookup"], rel=0.02)


def test_export_lists_the_advised_groups(clustered, tmp_path):
    out_csv = tmp_path / "groups.csv"
    code, out, err = _cli(
        "recommend", clustered, *COMMON, *SMALL, "--model", "parquet", "--json", "--no-frontier", "--export", out_csv
    )
    assert code == 0, err
    run = json.loads(out)
    con = duckdb.connect()
    rows = con.execute(
        f"SELECT first_key, last_key, rows, lookup_share FROM read_csv('{out_csv}') ORDER BY 1"
    ).fetchall()
    assert [r[0] for r in rows] == run["advised_first_keys"]
    assert sum(r[2] for r in rows) == KEYS
    assert all(a[1] < b[0] for a, b in zip(rows, rows[1:], strict=False))
    # every hit reads one group; a miss reads one or none
    assert run["hits"] / run["lookups"] - 1e-9 <= sum(r[3] for r in rows) <= 1 + 1e-9
    code, out, err = _cli("recommend", clustered, *COMMON, "--model", "parquet", "--export", out_csv)
    assert code == 7 and len(err.strip().splitlines()) == 1


def test_range_scans_are_planned(clustered, tmp_path):
    """Log rows with an end value are scans: counted apart from point lookups, and the advised cut
    reads no more than the even file with them."""
    db = str(tmp_path / "scans.duckdb")
    con = duckdb.connect(db)
    con.execute(f"ATTACH '{clustered}' AS src (READ_ONLY)")
    con.execute("CREATE TABLE orders AS SELECT * FROM src.orders")
    con.execute(
        "CREATE TABLE lookups AS SELECT order_id, CASE WHEN seq % 5 = 0 THEN order_id + 30 END AS upto FROM src.lookups"
    )
    scans = con.execute("SELECT count(*) FROM lookups WHERE upto IS NOT NULL AND order_id IS NOT NULL").fetchall()[0][0]
    con.close()
    code, out, err = _cli(
        "recommend", db, *COMMON, *SMALL, "--model", "parquet", "--scan-to", "upto", "--json", "--no-frontier"
    )
    assert code == 0, err
    run = json.loads(out)
    assert run["scans"] == scans and run["point_lookups"] == 20_000 - scans
    plan = run["plans"][0]
    assert plan["optimized"]["expected_bytes"] <= plan["uniform"]["expected_bytes"]
    assert plan["proven_optimal"]
