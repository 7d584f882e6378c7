"""Page checksums and `advisor verify`: damage is found, named and never answered with a wrong row.

The committed test vectors (tests/data/vector-*.idx, 20 INTEGER keys 0, 3, ..., 57 stored in a
shuffled row order, 256-byte pages) are read here by a reader written from the README's format
section alone (struct and zlib, nothing from advisor), so the section is complete enough to
write a reader in another language.
"""

from __future__ import annotations

import json
import struct
import zlib
from pathlib import Path

import duckdb
import numpy as np
import pytest
from typer.testing import CliRunner

from advisor.cli import app
from advisor.errors import InputInvalid, LayoutInvalid
from advisor.pagefile import sealed
from advisor.verify import verify_file

DATA = Path(__file__).parent / "data"
runner = CliRunner()


def spec_lookup(path: Path, key: int) -> int | None:
    """A lookup by the README's format alone (INTEGER keys: int32 big-endian, sign bit flipped)."""
    blob = path.read_bytes()
    assert blob[:8] == b"ADVPGIX1"
    version, page_size = struct.unpack_from("<II", blob, 8)
    assert version == 2
    pages = len(blob) // page_size
    for p in range(pages):  # every page ends with the CRC-32 of the rest
        page = blob[p * page_size : (p + 1) * page_size]
        assert zlib.crc32(page[:-4]) == struct.unpack("<I", page[-4:])[0]
    code = ((key + (1 << 31)) & 0xFFFFFFFF).to_bytes(4, "big")
    number = 1
    while number:
        page = blob[number * page_size : (number + 1) * page_size]
        kind, count = page[0], struct.unpack_from("<I", page, 4)[0]
        keys = [page[8 + 4 * i : 12 + 4 * i] for i in range(count)]
        after = 8 + 4 * count
        below = sum(k < code for k in keys)
        equal = below < count and keys[below] == code
        if kind == 2:  # B+ internal: child = separators at or below the value
            number = struct.unpack_from("<I", page, after + 4 * (below + equal))[0]
        elif kind == 1:  # leaf: u32 next leaf, then the rows
            return struct.unpack_from("<Q", page, after + 4 + 8 * below)[0] if equal else None
        else:  # classic: count + 1 children, then count rows
            if equal:
                return struct.unpack_from("<Q", page, after + 4 * (count + 1) + 8 * below)[0]
            number = struct.unpack_from("<I", page, after + 4 * below)[0]
    return None


@pytest.mark.parametrize("model", ["btree", "bplus"])
def test_the_committed_vectors_read_as_the_format_says(model):
    path = DATA / f"vector-{model}.idx"
    expected = json.loads((DATA / "vector-lookups.json").read_text())
    from advisor.pagefile import PagedIndex

    with PagedIndex(path) as index:
        for key, row in expected.items():
            assert spec_lookup(path, int(key)) == row
            assert index.get(int(key)) == row
    assert verify_file(path)["keys"] == 20


@pytest.fixture(scope="module")
def built(tmp_path_factory):
    """Invented: 1,200 keys, a skewed log; classic and B+ files of 512-byte pages."""
    root = tmp_path_factory.mktemp("verify")
    db = root / "v.duckdb"
    con = duckdb.connect(str(db))
    con.execute("CREATE TABLE t AS SELECT (range * 7 % 1200) * 2 AS k FROM range(1200)")
    rng = np.random.default_rng(3)
    con.register("p", {"k": ((rng.zipf(1.3, 4000) % 1250) * 2).astype(np.int64)})
    con.execute("CREATE TABLE lg AS SELECT k FROM p")
    con.close()
    files = {}
    for model in ("btree", "bplus"):
        out = root / f"{model}.idx"
        res = runner.invoke(
            app,
            ["build", str(db), "--table", "t", "--key", "k", "--log", "lg", "--page-size", "512", "--model", model]
            + ["--out", str(out)],
        )
        assert res.exit_code == 0, res.stderr
        files[model] = out
    return db, files


@pytest.mark.parametrize("model", ["btree", "bplus"])
def test_random_byte_flips_are_found_and_never_answered(built, tmp_path, model):
    """Flip one byte anywhere in the file (30 seeded places): verify refuses the file with one
    line naming the damage, and probe fails rather than answer (never exit 0, never a wrong row)."""
    db, files = built
    blob = files[model].read_bytes()
    rng = np.random.default_rng(11)
    for trial, at in enumerate(rng.integers(0, len(blob), 30).tolist()):
        bad = bytearray(blob)
        bad[at] ^= 1 << int(rng.integers(0, 8))
        path = tmp_path / f"flip-{trial}.idx"
        path.write_bytes(bytes(bad))
        with pytest.raises((LayoutInvalid, InputInvalid)):
            verify_file(path)
        if trial < 3:  # through the CLI: probe and verify fail with one line
            res = runner.invoke(app, ["probe", str(path), str(db), "--log", "lg", "--json"])
            assert res.exit_code in (4, 8) and len(res.stderr.strip().splitlines()) == 1, (at, res.stderr)
            res = runner.invoke(app, ["verify", str(path)])
            assert res.exit_code in (4, 8) and len(res.stderr.strip().splitlines()) == 1


def _reseal(blob: bytes, page: int, page_size: int, change) -> bytes:
    """The file with page ``page``'s body changed and its checksum made right again."""
    raw = bytearray(blob[page * page_size : (page + 1) * page_size - 4])
    change(raw)
    return blob[: page * page_size] + sealed(bytes(raw), page_size) + blob[(page + 1) * page_size :]


def test_invariants_broken_under_good_checksums_are_named(built, tmp_path):
    """Damage a checksum cannot see (the page re-sealed): verify names the page and the rule."""
    _, files = built
    blob = files["bplus"].read_bytes()
    ps = struct.unpack_from("<I", blob, 12)[0]

    def swap_first_keys(raw):  # the root's first two separators (8-byte codes) exchanged
        raw[8:16], raw[16:24] = raw[16:24], raw[8:16]

    def self_link(raw):  # the root's first child link points back at the root
        count = struct.unpack_from("<I", raw, 4)[0]
        struct.pack_into("<I", raw, 8 + 8 * count, 1)

    for change, words in ((swap_first_keys, "out of order"), (self_link, "linked twice")):
        path = tmp_path / f"{change.__name__}.idx"
        path.write_bytes(_reseal(blob, 1, ps, change))
        with pytest.raises(LayoutInvalid, match=words):
            verify_file(path)
    # a leaf whose next-leaf link skips a leaf
    for number in range(1, len(blob) // ps):
        page = blob[number * ps : (number + 1) * ps]
        if page[0] == 1 and struct.unpack_from("<I", page, 8 + 8 * struct.unpack_from("<I", page, 4)[0])[0]:
            count = struct.unpack_from("<I", page, 4)[0]
            path = tmp_path / "chain.idx"
            path.write_bytes(_reseal(blob, number, ps, lambda raw, c=count: struct.pack_into("<I", raw, 8 + 8 * c, 0)))
            with pytest.raises(LayoutInvalid, match="next-leaf"):
                verify_file(path)
            break
    else:
        pytest.fail("no leaf with a next leaf")


def test_a_format_1_file_is_refused_with_a_rebuild_message(built, tmp_path):
    db, files = built
    blob = bytearray(files["btree"].read_bytes())
    struct.pack_into("<I", blob, 8, 1)
    path = tmp_path / "old.idx"
    path.write_bytes(bytes(blob))
    res = runner.invoke(app, ["verify", str(path)])
    assert res.exit_code == 4 and "rebuild" in res.stderr
    res = runner.invoke(app, ["probe", str(path), str(db), "--log", "lg"])
    assert res.exit_code == 4 and "format 1" in res.stderr


def test_sound_files_verify(built):
    _, files = built
    for model, path in files.items():
        res = runner.invoke(app, ["verify", str(path), "--json"])
        assert res.exit_code == 0, res.stderr
        out = json.loads(res.stdout)
        assert out["ok"] and out["keys"] == 1200 and out["structure"] == model
