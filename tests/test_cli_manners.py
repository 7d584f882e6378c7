"""The command line's manners: --version, a run without a log, an unknown structure, and the
warnings a thin or odd log earns (terminal line on stderr and the JSON `warnings` list)."""

from __future__ import annotations

import json

import duckdb
import numpy as np
import pytest
from typer.testing import CliRunner

from advisor.cli import app
from advisor.histogram import Histogram

runner = CliRunner()


@pytest.fixture(scope="module")
def db(tmp_path_factory):
    path = tmp_path_factory.mktemp("manners") / "m.duckdb"
    con = duckdb.connect(str(path))
    con.execute("CREATE TABLE items AS SELECT i * 2 AS item_no FROM range(3000) t(i)")
    con.execute("CREATE TABLE misses AS SELECT i * 2 + 1 AS item_no FROM range(9) t(i)")
    con.execute("CREATE TABLE plenty AS SELECT (i * 7 % 3000) * 2 AS item_no FROM range(20000) t(i)")
    con.execute("CREATE TABLE few AS SELECT i * 2 AS item_no FROM range(400) t(i)")  # every key looked up
    con.execute("CREATE TABLE steady AS SELECT (i * 7 % 400) * 2 AS item_no FROM range(4000) t(i)")
    con.close()
    return str(path)


def _cli(*args):
    r = runner.invoke(app, [str(a) for a in args])
    return r.exit_code, r.stdout, r.stderr


def test_version():
    code, out, _ = _cli("--version")
    assert code == 0 and out.startswith("advisor ")


@pytest.mark.parametrize("command", ["recommend", "build"])
def test_a_run_without_a_log_is_a_usage_error(db, tmp_path, command):
    extra = ("--out", tmp_path / "x.idx") if command == "build" else ()
    code, out, err = _cli(command, db, "--table", "items", "--key", "item_no", *extra)
    assert code == 2 and out == ""
    assert len(err.strip().splitlines()) == 1 and "--log" in err


def test_unknown_structure_is_a_usage_error(db):
    code, _, err = _cli("recommend", db, "--table", "items", "--key", "item_no", "--log", "plenty", "--model", "bplusx")
    assert code == 2 and len(err.strip().splitlines()) == 1


def test_all_miss_log_is_warned(db):
    code, out, err = _cli(
        "recommend", db, "--table", "few", "--key", "item_no", "--log", "misses", "--keys-per-page", "8", "--json"
    )
    assert code == 0
    warnings = json.loads(out)["warnings"]
    assert any("too few" in w for w in warnings)
    assert any("no lookup" in w for w in warnings)
    assert "warning: only 9 lookups" in err


def test_a_healthy_log_has_no_warnings(db):
    code, out, _ = _cli(
        "recommend",
        db,
        "--table",
        "few",
        "--key",
        "item_no",
        "--log",
        "steady",
        "--keys-per-page",
        "8",
        "--no-frontier",
        "--json",
    )
    assert code == 0 and json.loads(out)["warnings"] == []


def test_warning_thresholds():
    """Each rule on its own (hand-made histograms)."""
    n = 200
    p = np.zeros(n)
    p[0] = 5000
    q = np.zeros(n + 1)
    assert Histogram(p, q).warnings() == ["99.5% of the keys were never looked up"]
    q[5] = 50_000
    assert any("miss" in w for w in Histogram(p, q).warnings())
    assert Histogram(np.full(n, 10.0), np.zeros(n + 1)).warnings() == []


@pytest.mark.parametrize(
    "argv, words",
    [
        (
            ["recommend", "x.duckdb", "--table", "t", "--key", "k", "--page-size", "abc"],
            ["--page-size", "whole number"],
        ),
        (["recommend"], ["Missing argument"]),
        (["recommend", "x.duckdb", "--table", "t", "--key", "k", "--bogus", "1"], ["--bogus"]),
        (["nonsense"], ["No such command"]),
    ],
)
def test_usage_errors_are_one_line_with_exit_2(argv, words):
    """Through the console entry point (the test runner's app call keeps the library's boxes)."""
    import subprocess
    import sys

    res = subprocess.run([sys.executable, "-m", "advisor", *argv], capture_output=True, text=True, timeout=60)
    assert res.returncode == 2 and res.stdout == ""
    lines = res.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("advisor: error: ")
    assert "Input should be" not in lines[0]
    for w in words:
        assert w in lines[0]


def test_first_run_note_when_the_kernels_are_not_compiled(tmp_path, monkeypatch, capsys):
    """In a terminal, a run whose kernel cache is empty says why it waits (one stderr line)."""
    from advisor import progress

    monkeypatch.setenv("NUMBA_CACHE_DIR", str(tmp_path))
    assert not progress.kernels_compiled()
    progress.first_run_note()
    err = capsys.readouterr().err
    assert err.startswith("advisor: first run here: compiling") and len(err.splitlines()) == 1
    (tmp_path / "x").mkdir()
    (tmp_path / "x" / "within_build.build_within-30.py311.nbi").write_bytes(b"")
    assert progress.kernels_compiled()
    progress.first_run_note()
    assert capsys.readouterr().err == ""
