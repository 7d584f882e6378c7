"""Held-out replay and histogram smoothing."""

from __future__ import annotations

import json

import duckdb
import numpy as np
import pytest
from typer.testing import CliRunner

from advisor.cli import app
from advisor.histogram import Histogram
from advisor.logreads import load_split
from advisor.workload import load_workload


def test_smoothing_blends_toward_uniform():
    h = Histogram(np.array([10.0, 0, 0]), np.array([0, 0, 0, 4.0]))
    assert h.smoothed(0.0) is h
    flat = h.smoothed(1.0)
    assert np.allclose(flat.p, 2.0) and np.allclose(flat.q, 2.0)
    half = h.smoothed(0.5)
    assert half.total == pytest.approx(h.total)
    assert half.p[0] == pytest.approx(5.0 + 1.0)


@pytest.fixture(scope="module")
def ordered_db(tmp_path_factory):
    path = tmp_path_factory.mktemp("h") / "h.duckdb"
    con = duckdb.connect(str(path))
    con.execute("CREATE TABLE t AS SELECT range * 2 AS k FROM range(3000)").fetchall()
    # traffic drifts: early lookups favour low keys, late ones high keys
    con.execute(
        "CREATE TABLE lg AS SELECT range AS ts, "
        "CASE WHEN range < 8000 THEN (hash(range) % 600) * 2 ELSE 6000 - (hash(range) % 900) * 2 - 1 END AS k "
        "FROM range(10000)"
    ).fetchall()
    con.close()
    return path


def test_split_adds_up_to_the_whole_log(ordered_db):
    with load_workload(ordered_db, "t", "k", "lg") as wl:
        train, test = load_split(wl, "ts", 0.2)
        np.testing.assert_allclose(train.p + test.p, wl.hist.p)
        np.testing.assert_allclose(train.q + test.q, wl.hist.q)
        assert test.total == pytest.approx(2000, abs=1)


@pytest.mark.slow  # several full runs: in the slow suite
def test_cli_shows_in_sample_and_held_out(ordered_db):
    res = CliRunner().invoke(
        app,
        [
            "recommend",
            str(ordered_db),
            "--table",
            "t",
            "--key",
            "k",
            "--log",
            "lg",
            "--json",
            "--order-column",
            "ts",
            "--keys-per-page",
            "10",
            "--smoothing",
            "0.2",
        ],
    )
    assert res.exit_code == 0, res.stderr
    held = json.loads(res.stdout)["holdout"]
    assert held["fraction"] == 0.2 and held["test_lookups"] == pytest.approx(2000, abs=1)
    assert [r["smoothing"] for r in held["rows"]] == [0.0, 0.2]
    raw = held["rows"][0]
    # the drift makes the fitted plan worse on the later window than on its own sample
    assert raw["held_out"]["saving"] < raw["in_sample"]["saving"]
