"""Random tables and logs through the whole CLI: a documented exit code, never a traceback, and
when it succeeds, the JSON contract and a valid layout that re-costs to the reported figure."""

from __future__ import annotations

import datetime as dt
import json
import math
import uuid

import duckdb
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from typer.testing import CliRunner

from advisor.cli import app
from advisor.export import read_layout
from advisor.layout import check_layout, evaluate
from advisor.workload import load_workload

DOCUMENTED = {0, 3, 4, 5, 6, 7, 8}
runner = CliRunner()

TYPES = {
    "INTEGER": st.integers(-(2**31), 2**31 - 1),
    "BIGINT": st.integers(-(2**63), 2**63 - 1),
    "DOUBLE": st.floats(allow_nan=True, allow_infinity=True, width=64),
    "VARCHAR": st.text(max_size=12),
    "DATE": st.dates(min_value=dt.date(1, 1, 1), max_value=dt.date(9999, 12, 31)),
    "TIMESTAMP": st.datetimes(min_value=dt.datetime(1900, 1, 1), max_value=dt.datetime(2200, 1, 1)),
    "UUID": st.uuids(),
    "DECIMAL(10,2)": st.decimals(min_value=-(10**7), max_value=10**7, places=2, allow_nan=False),
}


def _with_nulls(values):
    return st.lists(st.one_of(st.none(), values), min_size=0, max_size=40)


@st.composite
def cases(draw):
    key_type = draw(st.sampled_from(sorted(TYPES)))
    keys = draw(st.lists(st.one_of(st.none(), TYPES[key_type]), min_size=0, max_size=40))
    log_type = draw(st.sampled_from([key_type, key_type, "VARCHAR", "BIGINT"]))
    from_keys = st.sampled_from([k for k in keys]) if keys and log_type == key_type else TYPES[log_type]
    log = draw(st.lists(st.one_of(st.none(), from_keys, TYPES[log_type]), min_size=0, max_size=60))
    counts = draw(st.none() | st.lists(st.integers(0, 5), min_size=len(log), max_size=len(log)))
    distinct = draw(st.booleans())
    c = draw(st.integers(1, 6))
    return key_type, keys, log_type, log, counts, distinct, c


def _insert(con, table, sql_type, values, counts=None):
    if counts is None:
        con.execute(f"CREATE TABLE {table} (k {sql_type})").fetchall()
        rows = [[v] for v in values]
        if rows:
            con.executemany(f"INSERT INTO {table} VALUES (?::{sql_type})", rows)
    else:
        con.execute(f"CREATE TABLE {table} (k {sql_type}, n BIGINT)").fetchall()
        rows = [[v, n] for v, n in zip(values, counts, strict=False)]
        if rows:
            con.executemany(f"INSERT INTO {table} VALUES (?::{sql_type}, ?)", rows)


def _python(v):
    if isinstance(v, uuid.UUID):
        return str(v)
    if isinstance(v, float) and not math.isfinite(v):
        return str(v)  # DuckDB casts 'nan' / 'inf' text to DOUBLE
    return v


_HEALTH = [HealthCheck.function_scoped_fixture, HealthCheck.too_slow]


@settings(max_examples=6, deadline=None, suppress_health_check=_HEALTH)
@given(case=cases())
def test_random_inputs_through_the_cli(tmp_path_factory, case):
    _through_the_cli(tmp_path_factory, case)


@pytest.mark.slow
@settings(max_examples=40, deadline=None, suppress_health_check=_HEALTH)
@given(case=cases())
def test_random_inputs_through_the_cli_many(tmp_path_factory, case):
    _through_the_cli(tmp_path_factory, case)


def _through_the_cli(tmp_path_factory, case):
    key_type, keys, log_type, log, counts, distinct, c = case
    d = tmp_path_factory.mktemp("fuzz")
    db = d / "f.duckdb"
    con = duckdb.connect(str(db))
    try:
        _insert(con, "t", key_type, [_python(k) for k in keys])
        _insert(con, "lg", log_type, [_python(v) for v in log], counts)
    except duckdb.Error:
        con.close()
        return  # the generator made a value DuckDB itself refuses; nothing to test
    con.close()
    export = d / "layout.parquet"
    argv = [
        "recommend",
        str(db),
        "--table",
        "t",
        "--key",
        "k",
        "--log",
        "lg",
        "--json",
        "--keys-per-page",
        str(c),
        "--export",
        str(export),
    ]
    if counts is not None:
        argv += ["--count-column", "n"]
    if distinct:
        argv.append("--distinct-keys")
    res = runner.invoke(app, argv)
    assert res.exit_code in DOCUMENTED, (res.exit_code, res.stderr, res.stdout)
    assert "Traceback" not in res.stderr + res.stdout
    if res.exit_code != 0:
        assert len(res.stderr.strip().splitlines()) == 1
        assert not export.exists()
        return
    run = json.loads(res.stdout)
    assert isinstance(run["keys"], int)
    (p,) = run["plans"]
    assert p["keys_per_page"] == c and p["page_size"] is None
    assert p["lower_bound"] <= p["optimized"]["expected_page_reads"] + 1e-9
    assert p["optimized"]["expected_page_reads"] <= p["uniform"]["expected_page_reads"] + 1e-9
    # the default budget: never more pages or levels than the even split, in every frontier row
    # that keeps the even split's page count, and in the export
    assert p["optimized"]["pages"] <= p["uniform"]["pages"] and p["optimized"]["height"] <= p["uniform"]["height"]
    for row in p["frontier"]:
        assert row["height"] <= p["uniform"]["height"]
        assert row["max_pages"] is None or row["pages"] <= row["max_pages"]
    with load_workload(db, "t", "k", "lg", count_column="n" if counts is not None else None, distinct_keys=True) as wl:
        if wl.hist.n == 0:
            return
        layout = read_layout(wl, export, c)
        check_layout(layout)
        assert evaluate(layout, wl.hist).expected_page_reads == pytest.approx(
            p["optimized"]["expected_page_reads"], rel=1e-9
        )
