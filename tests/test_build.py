"""advisor build / probe: the paged file holds the layout, and its counted reads match the model."""

from __future__ import annotations

import datetime as dt
import json

import duckdb
import numpy as np
import pytest
from typer.testing import CliRunner

from advisor.cli import app
from advisor.keycodec import encode
from advisor.pagefile import PagedIndex

runner = CliRunner()


@pytest.fixture(scope="module")
def dbs(tmp_path_factory):
    """Invented tables with INTEGER, VARCHAR and DATE keys (rows inserted in shuffled order, so
    row numbers differ from key ranks) and skewed logs with misses."""
    root = tmp_path_factory.mktemp("build")
    path = root / "b.duckdb"
    rng = np.random.default_rng(1)
    con = duckdb.connect(str(path))
    keys = rng.permutation(np.arange(0, 6000, 3)).astype(np.int64)
    con.register("k_in", {"k": keys})
    con.execute("CREATE TABLE ints AS SELECT k::INTEGER AS k, k % 5 AS extra FROM k_in").fetchall()
    con.execute("CREATE TABLE words AS SELECT 'w' || lpad(k::VARCHAR, 5, '0') AS k FROM k_in").fetchall()
    con.execute("CREATE TABLE days AS SELECT DATE '2001-01-01' + k::INTEGER AS k FROM k_in").fetchall()
    probe = (rng.zipf(1.3, 20_000) * 3 + rng.integers(0, 2, 20_000)) % 6100
    con.register("p_in", {"v": probe.astype(np.int64), "seq": np.arange(probe.size)})
    con.execute("CREATE TABLE lg_ints AS SELECT v::INTEGER AS k, seq FROM p_in").fetchall()
    con.execute("CREATE TABLE lg_words AS SELECT 'w' || lpad(v::VARCHAR, 5, '0') AS k FROM p_in").fetchall()
    con.execute("CREATE TABLE lg_days AS SELECT DATE '2001-01-01' + v::INTEGER AS k FROM p_in").fetchall()
    con.close()
    return path, root


def _build(db, out, table, log, *extra):
    return runner.invoke(
        app, ["build", str(db), "--table", table, "--key", "k", "--log", log, "--out", str(out), "--json", *extra]
    )


@pytest.mark.parametrize("table", ["ints", pytest.param("words", marks=pytest.mark.slow), "days"])
@pytest.mark.parametrize("model", [[], ["--model", "bplus"]])
def test_built_file_reads_what_the_model_predicts(dbs, table, model):
    db, root = dbs
    out = root / f"{table}-{len(model)}.idx"
    extra = ["--key-bytes", "8"] if table == "words" else []
    res = _build(db, out, table, f"lg_{table}", "--page-size", "512", "--force", *model, *extra)
    assert res.exit_code == 0, res.stderr
    built = json.loads(res.stdout)
    assert set(built) == {"path", "pages", "page_size", "layout", "model", "predicted_page_reads", "leaf_depths"}
    assert out.stat().st_size == (built["pages"] + 1) * 512
    probe = runner.invoke(app, ["probe", str(out), str(db), "--log", f"lg_{table}", "--json"])
    assert probe.exit_code == 0, probe.stderr
    r = json.loads(probe.stdout)
    assert r["lookups"] == 20_000 and r["found"] + r["not_found"] == 20_000 and r["wrong_rows"] == 0
    # the counted reads (one pread per page visited) equal the evaluator on the same lookups,
    # and, the probe log being the planning log, the build's own prediction
    assert r["page_reads_per_lookup"] == pytest.approx(r["predicted_page_reads_per_lookup"], rel=1e-12)
    assert r["page_reads_per_lookup"] == pytest.approx(built["predicted_page_reads"], rel=1e-9)


def test_library_reader_returns_every_row_number(dbs):
    db, root = dbs
    out = root / "lib.idx"
    assert _build(db, out, "ints", "lg_ints", "--page-size", "512", "--force").exit_code == 0
    con = duckdb.connect(str(db), read_only=True)
    rows = dict(con.execute("SELECT k, rowid FROM ints").fetchall())
    con.close()
    with PagedIndex(out) as index:
        for k, row in rows.items():
            assert index.get(k) == row
        before = index.pages_read
        assert index.get(1) is None and index.get(-5) is None and index.get(10**9) is None
        assert index.pages_read > before


def test_even_layout_and_pool(dbs):
    db, root = dbs
    out = root / "even.idx"
    assert _build(db, out, "ints", "lg_ints", "--page-size", "512", "--layout", "even", "--force").exit_code == 0
    r = json.loads(
        runner.invoke(
            app,
            [
                "probe",
                str(out),
                str(db),
                "--log",
                "lg_ints",
                "--json",
                "--pool-pages",
                "4",
                "--cold",
                "--limit",
                "5000",
                "--order-column",
                "seq",
            ],
        ).stdout
    )
    assert r["lookups"] == 5000 and r["cold"] is True
    assert 0 < r["pool_misses_per_lookup"] < r["page_reads_per_lookup"]


def test_key_codes_keep_duckdb_order():
    for bits in (8, 16, 32, 64):
        ints = [-(2 ** (bits - 1)), -5, -1, 0, 1, 7, 2 ** (bits - 1) - 1]
        assert sorted(encode(f"int{bits}", x) for x in ints) == [encode(f"int{bits}", x) for x in ints]
        assert len(encode(f"int{bits}", 0)) == bits // 8
    assert sorted(encode("float32", x) for x in (-1.5, 0.0, 2.0)) == [encode("float32", x) for x in (-1.5, 0.0, 2.0)]
    floats = [float("-inf"), -2.5, -0.5, 0.0, 1e-300, 3.0, float("inf"), float("nan")]
    assert sorted(encode("float64", x) for x in floats) == [encode("float64", x) for x in floats]
    words = ["", "a", "ab", "b", "é"]
    assert sorted(encode("utf8", w) for w in words) == [encode("utf8", w) for w in words]
    days = [dt.date(1, 1, 1), dt.date(1969, 12, 31), dt.date(1970, 1, 1), dt.date(2024, 2, 29)]
    from advisor.keycodec import encode_value

    assert sorted(encode_value("int32", d) for d in days) == [encode_value("int32", d) for d in days]


@pytest.mark.slow
def test_overflowing_page_is_refused_and_nothing_is_written(dbs):
    db, root = dbs
    out = root / "tight.idx"
    # 6-byte keys sized as 1 byte and no page header: every full page overflows its 256 bytes
    res = _build(
        db,
        out,
        "words",
        "lg_words",
        "--page-size",
        "256",
        "--key-bytes",
        "1",
        "--page-header",
        "0",
        "--child-pointer",
        "4",
    )
    assert res.exit_code == 5 and "needs" in res.stderr and len(res.stderr.strip().splitlines()) == 1
    assert not out.exists() and not list(root.glob(".*partial*"))


def test_build_refuses_to_overwrite_and_probe_refuses_a_foreign_file(dbs):
    db, root = dbs
    out = root / "once.idx"
    assert _build(db, out, "ints", "lg_ints", "--page-size", "512").exit_code == 0
    again = _build(db, out, "ints", "lg_ints", "--page-size", "512")
    assert again.exit_code == 7 and "--force" in again.stderr
    foreign = root / "foreign.idx"
    foreign.write_bytes(b"not an index" * 100)
    res = runner.invoke(app, ["probe", str(foreign), str(db), "--log", "lg_ints"])
    assert res.exit_code == 4 and "magic" in res.stderr


@pytest.mark.parametrize("table", ["ints", pytest.param("words", marks=pytest.mark.slow)])
@pytest.mark.parametrize("model", [[], ["--model", "bplus"]])
def test_compiled_reader_agrees_with_the_plain_reader_on_every_key_and_gap(dbs, table, model):
    """The compiled batch reader (advisor.pagefile_kernel) against the plain page-parsing reader:
    the same row and the same page count for every key, and for a value in every gap (searched
    as just above the key below it, and below the first key)."""
    from advisor.build import _flat_codes, read_layout_from_file
    from advisor.pagefile_kernel import ABOVE, BELOW, EXACT, find_many

    db, root = dbs
    out = root / f"agree-{table}-{len(model)}.idx"
    extra = ["--key-bytes", "8"] if table == "words" else []
    assert _build(db, out, table, f"lg_{table}", "--page-size", "512", "--force", *model, *extra).exit_code == 0
    with PagedIndex(out) as index:
        h = index.header
        _, codes = read_layout_from_file(index)
        n = len(codes)
        which = np.concatenate([np.arange(n), np.arange(n), [0]])
        modes = np.concatenate([np.full(n, EXACT), np.full(n, ABOVE), [BELOW]]).astype(np.int8)
        rows, reads, stops = (np.empty(which.size, dtype=np.int64) for _ in range(3))
        flat, starts, lengths = _flat_codes(codes)
        find_many(
            index.mapped(), h.page_size, h.root, h.fixed_width, flat, starts, lengths, which, modes, rows, reads, stops
        )
        for j, (r, m) in enumerate(zip(which.tolist(), modes.tolist(), strict=True)):
            code = codes[r] if m == EXACT else codes[r] + b"\x00" if m == ABOVE else b""  # just above / below
            before = index.pages_read
            row = index.find(code)
            assert (row if row is not None else -1) == rows[j]
            assert index.pages_read - before == reads[j]
    assert (rows[:n] >= 0).all() and (rows[n:] == -1).all()


@pytest.fixture(scope="module")
def typed(tmp_path_factory):
    """Invented: BIGINT and DATE keys probed by logs of another type (DOUBLE, TIMESTAMP) and with
    count columns (whole, fractional, huge)."""
    path = tmp_path_factory.mktemp("typed") / "t.duckdb"
    con = duckdb.connect(str(path))
    con.execute("CREATE TABLE nums AS SELECT range * 10 AS k FROM range(500)")
    con.execute(
        "CREATE TABLE dnums AS SELECT (range * 10)::DOUBLE + CASE WHEN range % 3 = 0 THEN 0.5 ELSE 0 END AS k, "
        "CASE WHEN range % 7 = 0 THEN 3000000000 ELSE 2 END AS n, 1.25 AS frac, -1 AS neg FROM range(400)"
    )
    con.execute("CREATE TABLE days AS SELECT DATE '2020-01-01' + range::INTEGER AS k FROM range(300)")
    con.execute(
        "CREATE TABLE stamps AS SELECT TIMESTAMP '2020-01-01' + INTERVAL (range * 6) HOUR AS k FROM range(1000)"
    )
    con.close()
    return path


def _json(args):
    res = runner.invoke(app, args)
    assert res.exit_code == 0, res.stderr
    return json.loads(res.stdout)


def _recommend_counts(db, table, log, count=None):
    """Lookups, hits and misses as recommend counts them (its workload reader, the same code path)."""
    import advisor

    with advisor.load_workload(db, table, "k", log, count_column=count) as wl:
        s = wl.hist.summary()
    return s["lookups"], s["hits"], s["misses"]


def test_probe_decides_hits_as_recommend_does_across_types(typed, tmp_path):
    """A DOUBLE 19.99-style value on a BIGINT key and a TIMESTAMP between midnights on a DATE key
    are misses for recommend; probe counted them as the next key's hit before (review defect)."""
    for table, log in (("nums", "dnums"), ("days", "stamps")):
        out = tmp_path / f"{table}.idx"
        assert _build(typed, out, table, log, "--page-size", "512").exit_code == 0
        lookups, hits, misses = _recommend_counts(typed, table, log)
        assert 0 < hits < lookups and misses > 0
        probe = _json(["probe", str(out), str(typed), "--log", log, "--json"])
        assert probe["found"] == hits and probe["not_found"] == misses and probe["wrong_rows"] == 0
        assert probe["page_reads_per_lookup"] == pytest.approx(probe["predicted_page_reads_per_lookup"], rel=1e-12)


def test_probe_counts_as_recommend_counts(typed, tmp_path):
    """Counts weigh a row's reads (3e9 does not replay one by one); fractional counts weigh alike
    and negative ones are refused, as in recommend; a missing index file is exit 3."""
    out = tmp_path / "nums.idx"
    assert _build(typed, out, "nums", "dnums", "--page-size", "512").exit_code == 0
    probe = _json(["probe", str(out), str(typed), "--log", "dnums", "--count-column", "n", "--json"])
    lookups, hits, _ = _recommend_counts(typed, "nums", "dnums", "n")
    assert lookups > 1e11 and probe["lookups"] == lookups and probe["found"] == hits
    assert probe["page_reads_per_lookup"] == pytest.approx(probe["predicted_page_reads_per_lookup"], rel=1e-9)
    frac = _json(["probe", str(out), str(typed), "--log", "dnums", "--count-column", "frac", "--json"])
    lookups, hits, _ = _recommend_counts(typed, "nums", "dnums", "frac")  # fractional counts weigh alike
    assert frac["lookups"] == lookups and frac["found"] == hits
    bad = runner.invoke(app, ["probe", str(out), str(typed), "--log", "dnums", "--count-column", "neg"])
    assert bad.exit_code == 4 and len(bad.stderr.strip().splitlines()) == 1
    gone = runner.invoke(app, ["probe", str(tmp_path / "nope.idx"), str(typed), "--log", "dnums"])
    assert gone.exit_code == 3 and "not found" in gone.stderr


def test_build_prints_the_probe_command_and_probe_takes_a_log_query(dbs, tmp_path):
    db, root = dbs
    out = tmp_path / "q.idx"
    res = runner.invoke(
        app,
        [
            "build",
            str(db),
            "--table",
            "ints",
            "--key",
            "k",
            "--log",
            "lg_ints",
            "--page-size",
            "512",
            "--out",
            str(out),
        ],
    )
    assert res.exit_code == 0, res.stderr
    said = " ".join(res.stdout.split())
    assert f"advisor probe {out} {db} --log lg_ints" in said
    query = tmp_path / "log.sql"
    query.write_text("SELECT k FROM lg_ints WHERE seq < 5000")
    by_sql = _json(["probe", str(out), str(db), "--log-sql", str(query), "--json"])
    limited = _json(
        ["probe", str(out), str(db), "--log", "lg_ints", "--order-column", "seq", "--limit", "5000", "--json"]
    )
    assert by_sql["lookups"] == limited["lookups"] == 5000
    assert by_sql["page_reads_per_lookup"] == pytest.approx(limited["page_reads_per_lookup"], rel=1e-12)


def _direct_supported(path) -> bool:
    import os

    try:
        os.close(os.open(path, os.O_RDONLY | os.O_DIRECT))
        return True
    except OSError:
        return False


@pytest.mark.slow  # two files built and timed on the device
def test_direct_times_files_side_by_side_with_the_counted_reads(dbs, tmp_path):
    """--direct: every page read with O_DIRECT, files taking turns; the reads it counts equal the
    compiled reader's for the same lookups (rows replayed once each), in both files."""
    db, _ = dbs
    even, advised = tmp_path / "even.idx", tmp_path / "adv.idx"
    assert (
        _build(db, even, "words", "lg_words", "--page-size", "512", "--key-bytes", "8", "--layout", "even").exit_code
        == 0
    )
    assert _build(db, advised, "words", "lg_words", "--page-size", "512", "--key-bytes", "8").exit_code == 0
    res = runner.invoke(
        app,
        [
            "probe",
            str(even),
            str(advised),
            str(db),
            "--log",
            "lg_words",
            "--direct",
            "--limit",
            "1500",
            "--json",
        ],
    )
    if not _direct_supported(even):
        assert res.exit_code == 5 and "O_DIRECT" in res.stderr
        return
    assert res.exit_code == 0, res.stderr
    files = json.loads(res.stdout)["files"]
    assert [f["path"] for f in files] == [str(even), str(advised)]
    for f, path in zip(files, (even, advised), strict=True):
        plain = _json(["probe", str(path), str(db), "--log", "lg_words", "--limit", "1500", "--json"])
        assert f["lookups"] == 1500 and f["found"] == plain["found"]
        assert f["page_reads_per_lookup"] == pytest.approx(plain["page_reads_per_lookup"], rel=1e-12)
        lo, hi = f["microseconds_per_lookup_spread"]
        assert 0 < lo <= f["microseconds_per_lookup_median"] <= hi
    assert files[1]["page_reads_per_lookup"] < files[0]["page_reads_per_lookup"]
    one = runner.invoke(app, ["probe", str(even), str(advised), str(db), "--log", "lg_words"])
    assert one.exit_code == 2 and "--direct" in one.stderr


def test_direct_refused_where_the_filesystem_refuses_it(dbs, tmp_path, monkeypatch):
    """A filesystem that refuses O_DIRECT (older tmpfs, some overlays: os.open fails with EINVAL,
    simulated here because this machine's tmpfs takes it): one line, exit 5."""
    import errno
    import os

    import advisor.build

    db, _ = dbs
    built = tmp_path / "s.idx"
    assert _build(db, built, "ints", "lg_ints", "--page-size", "512").exit_code == 0
    real_open = os.open

    def refusing(path, flags, *rest):
        if flags & os.O_DIRECT:
            raise OSError(errno.EINVAL, "Invalid argument")
        return real_open(path, flags, *rest)

    monkeypatch.setattr(advisor.build.os, "open", refusing)
    res = runner.invoke(app, ["probe", str(built), str(db), "--log", "lg_ints", "--direct"])
    assert res.exit_code == 5 and "O_DIRECT" in res.stderr and len(res.stderr.strip().splitlines()) == 1


def test_balanced_layout_builds_with_every_leaf_at_one_depth(dbs, tmp_path):
    """--layout balanced (B+): every leaf at the even split's depth in the file, verify passes,
    counted reads equal predicted (the height, for every lookup), and the export writes the same."""
    from advisor.verify import verify_file

    db, _ = dbs
    out = tmp_path / "bal.idx"
    res = _build(db, out, "ints", "lg_ints", "--page-size", "512", "--model", "bplus", "--layout", "balanced")
    assert res.exit_code == 0, res.stderr
    built = json.loads(res.stdout)
    assert built["layout"] == "balanced" and len(built["leaf_depths"]) == 1
    even = _build(
        db, tmp_path / "e.idx", "ints", "lg_ints", "--page-size", "512", "--model", "bplus", "--layout", "even"
    )
    assert json.loads(even.stdout)["leaf_depths"] == built["leaf_depths"]
    assert verify_file(out)["height"] == built["leaf_depths"][0]
    probe = _json(["probe", str(out), str(db), "--log", "lg_ints", "--json"])
    assert probe["page_reads_per_lookup"] == pytest.approx(built["predicted_page_reads"], rel=1e-12)
    assert probe["page_reads_per_lookup"] == pytest.approx(built["leaf_depths"][0])
    export = tmp_path / "bal.json"
    args = ["recommend", str(db), "--table", "ints", "--key", "k", "--log", "lg_ints", "--page-size", "512"]
    run = _json(
        [*args, "--model", "bplus", "--export-layout", "balanced", "--export", str(export), "--no-frontier", "--json"]
    )
    assert run["exports"] == [str(export)]
    pages = json.loads(export.read_text())  # one object per page (README: the export's columns)
    assert {p["depth"] for p in pages if p["is_leaf"]} == set(built["leaf_depths"])
    bad = runner.invoke(app, [*args, "--export-layout", "balanced", "--export", str(tmp_path / "x.json")])
    assert bad.exit_code == 5 and "--model bplus" in bad.stderr
    bad = _build(db, tmp_path / "y.idx", "ints", "lg_ints", "--page-size", "512", "--layout", "balanced")
    assert bad.exit_code == 5 and "--model bplus" in bad.stderr


def test_infinite_timestamps_and_dates_build_and_probe(tmp_path):
    """TIMESTAMP and DATE infinities (review defect: build exited 1) are coded beyond every
    finite value, as DuckDB orders them; every key is found at its own row."""
    from advisor.verify import verify_file

    db = tmp_path / "inf.duckdb"
    con = duckdb.connect(str(db))
    con.execute(
        "CREATE TABLE ts AS SELECT k FROM (SELECT TIMESTAMP '2020-01-01' + INTERVAL (range) HOUR AS k FROM range(300) "
        "UNION ALL SELECT 'infinity'::TIMESTAMP UNION ALL SELECT '-infinity'::TIMESTAMP) ORDER BY hash(k)"
    )
    con.execute(
        "CREATE TABLE ds AS SELECT k FROM (SELECT DATE '2020-01-01' + range::INTEGER AS k FROM range(300) "
        "UNION ALL SELECT 'infinity'::DATE UNION ALL SELECT '-infinity'::DATE) ORDER BY hash(k)"
    )
    con.close()
    for table in ("ts", "ds"):
        out = tmp_path / f"{table}.idx"
        res = runner.invoke(
            app,
            ["build", str(db), "--table", table, "--key", "k", "--log", table, "--page-size", "512", "--out", str(out)],
        )
        assert res.exit_code == 0, res.stderr
        probe = _json(["probe", str(out), str(db), "--log", table, "--json"])
        assert probe["lookups"] == probe["found"] == 302 and probe["wrong_rows"] == 0
        assert verify_file(out)["keys"] == 302


def test_a_key_longer_than_the_file_stores_is_refused_up_front(tmp_path):
    db = tmp_path / "long.duckdb"
    con = duckdb.connect(str(db))
    con.execute("CREATE TABLE w AS SELECT repeat('x', 70000) || range AS k FROM range(3)")
    con.close()
    out = tmp_path / "w.idx"
    args = ["build", str(db), "--table", "w", "--key", "k", "--log", "w", "--out", str(out)]
    res = runner.invoke(app, [*args, "--page-size", "65536", "--key-bytes", "8"])
    assert res.exit_code == 5 and "70,001 bytes" in res.stderr and len(res.stderr.strip().splitlines()) == 1
    assert not out.exists()


@pytest.fixture(scope="module")
def growing(tmp_path_factory):
    """Invented SKUs whose length grows with their order (7 to 66 bytes, mean 36.5), looked up
    by a Zipf 1.2 log: sized by the mean width, every page size and structure below overflowed."""
    path = tmp_path_factory.mktemp("grow") / "g.duckdb"
    con = duckdb.connect(str(path))
    con.execute(
        "CREATE TABLE skus AS SELECT chr(65 + (range * 26 // 20000)::INTEGER) "
        "|| repeat('z', (range * 60 // 20000)::INTEGER) || lpad(range::VARCHAR, 6, '0') AS k FROM range(20000)"
    )
    rng = np.random.default_rng(1)
    con.register("i", {"i": ((rng.zipf(1.2, 30000) - 1) % 20000).astype(np.int64)})
    con.execute(
        "CREATE TABLE lg AS SELECT s.k FROM i JOIN (SELECT k, row_number() OVER (ORDER BY k) - 1 AS r FROM skus) s "
        "ON s.r = i.i"
    )
    con.close()
    return path


@pytest.mark.parametrize("model", ["btree", "bplus"])
@pytest.mark.parametrize("size", [pytest.param("1024", marks=pytest.mark.slow), "4096"])
def test_variable_length_keys_sized_by_their_longest_build_what_recommend_plans(growing, tmp_path, model, size):
    out = tmp_path / "g.idx"
    args = ["--table", "skus", "--key", "k", "--log", "lg", "--page-size", size, "--model", model]
    planned = _json(["recommend", str(growing), *args, "--json", "--no-frontier", "--exact-seconds", "0"])
    assert "longest keys" in planned["inputs"]["key_sizing"]
    (plan,) = planned["plans"]
    assert plan["geometry"]["key_bytes"] > planned["inputs"]["key_bytes"]  # wider than the mean
    res = runner.invoke(app, ["build", str(growing), *args, "--exact-seconds", "0", "--out", str(out), "--json"])
    assert res.exit_code == 0, res.stderr
    built = json.loads(res.stdout)
    assert built["predicted_page_reads"] == pytest.approx(plan["optimized"]["expected_page_reads"], rel=1e-12)
    probe = _json(["probe", str(out), str(growing), "--log", "lg", "--json"])
    assert probe["wrong_rows"] == 0 and probe["found"] == probe["lookups"]
    assert probe["page_reads_per_lookup"] == pytest.approx(built["predicted_page_reads"], rel=1e-12)
    mean = f"{planned['inputs']['key_bytes']:g}"  # the old sizing by the mean width overflows a page
    old = runner.invoke(app, ["build", str(growing), *args, "--key-bytes", mean, "--out", str(tmp_path / "m.idx")])
    assert old.exit_code == 5 and "needs" in old.stderr
