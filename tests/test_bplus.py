"""The B+-tree family: exact solver vs brute force, textbook height, evaluator vs replay."""

from __future__ import annotations

import functools
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from advisor.histogram import Histogram
from advisor.layout import check_layout, evaluate
from advisor.optimize.bplus import (
    balanced_bplus,
    bplus_height,
    bplus_weights,
    hot_first_bplus,
    solve_bplus_exact,
    uniform_bplus,
)
from advisor.optimize.bplus_bounds import bplus_level_bound, bplus_window_bound

from .conftest import brute_force_bplus, random_hist


@settings(max_examples=120, deadline=None)
@given(data=st.data(), L=st.integers(1, 3), F=st.integers(2, 5), scale=st.sampled_from([1.0, 0.37]))
def test_exact_equals_brute_force(data, L, F, scale):
    # scale 1: whole counts (int32 tables); 0.37: fractional weights (float64 tables)
    n = data.draw(st.integers(1, 7))
    p = data.draw(st.lists(st.integers(0, 30), min_size=n, max_size=n))
    q = data.draw(st.lists(st.integers(0, 30), min_size=n + 1, max_size=n + 1))
    if sum(p) + sum(q) == 0:
        p[0] = 1
    hist = Histogram(np.array(p, float) * scale, np.array(q, float) * scale)
    res = solve_bplus_exact(hist, L, F)
    check_layout(res.layout)
    want = brute_force_bplus(bplus_weights(hist), L, F) / hist.total
    assert res.objective == pytest.approx(want, rel=1e-12)
    # both lower bounds stay below the brute-force optimum
    assert bplus_level_bound(hist, L, F) <= want + 1e-12
    assert bplus_window_bound(hist, L, F) <= want + 1e-12
    assert bplus_window_bound(hist, L, F, work_cap=1.0) <= want + 1e-12  # on key blocks
    assert evaluate(res.layout, hist).expected_page_reads == pytest.approx(res.objective, rel=1e-12)


@pytest.mark.parametrize("n", [1, 2, 9, 10, 11, 100, 999, 5000])
@pytest.mark.parametrize("L, F", [(1, 2), (3, 3), (10, 4), (64, 100)])
def test_uniform_height_matches_the_textbook(n, L, F):
    # height of a B+-tree with leaves of L entries and fanout F: 1 + ceil(log_F(ceil(n / L)))
    # (Ramakrishnan & Gehrke, Database Management Systems, 3rd ed., ch. 10, from memory)
    layout = uniform_bplus(n, L, F)
    check_layout(layout)
    leaves = math.ceil(n / L)
    textbook = 1 + (math.ceil(math.log(leaves, F) - 1e-12) if leaves > 1 else 0)
    cost = evaluate(layout, Histogram(np.ones(n), np.ones(n + 1)))
    assert cost.height == textbook == bplus_height(n, L, F)
    if F >= 3:  # all leaves at one depth: every lookup reads one full path
        assert cost.expected_page_reads == pytest.approx(textbook)


def _replay(layout, hist):
    """Walk each key and gap down by separators: child t covers ranks from separator t on."""
    import bisect

    kids = {(int(layout.parent[p]), int(layout.slot[p])): p for p in range(1, layout.pages)}

    def reads(value):
        page, k = 0, 0
        while True:
            k += 1
            if layout.leaf[page]:
                return k
            seps = list(layout.keys_of(page))
            page = kids[(page, bisect.bisect_right(seps, value))]

    n = hist.n
    total = sum(hist.p[i] * reads(i) for i in range(n))
    # a miss in gap g lies just below key g, so it follows key g - 1's route (gap 0: key 0's)
    total += sum(hist.q[g] * reads(max(g - 1, 0) + 0.5 if g else 0) for g in range(n + 1))
    return total / hist.total


@pytest.mark.parametrize("seed", range(4))
def test_evaluator_agrees_with_replay_and_properties(seed):
    rng = np.random.default_rng(seed)
    hist = random_hist(rng, 120)
    for L, F in [(2, 3), (5, 4), (16, 8)]:
        exact = solve_bplus_exact(hist, L, F)
        uni = uniform_bplus(hist.n, L, F)
        near = balanced_bplus(hist, L, F)
        hot = [hot_first_bplus(hist, L, F, extra) for extra in (0, 1)]
        for layout in (exact.layout, uni, near, *hot):
            check_layout(layout)
            assert evaluate(layout, hist).expected_page_reads == pytest.approx(_replay(layout, hist), rel=1e-12)
        e = evaluate(exact.layout, hist).expected_page_reads
        assert bplus_level_bound(hist, L, F) <= e + 1e-12
        assert e <= evaluate(near, hist).expected_page_reads + 1e-12
        assert all(e <= evaluate(x, hist).expected_page_reads + 1e-12 for x in hot)
        assert e <= evaluate(uni, hist).expected_page_reads + 1e-12


@pytest.mark.slow  # several full runs: in the slow suite
def test_bplus_through_the_cli(tmp_path):
    import json

    import duckdb
    from typer.testing import CliRunner

    from advisor.cli import app
    from advisor.export import read_layout
    from advisor.workload import load_workload

    db = tmp_path / "b.duckdb"
    con = duckdb.connect(str(db))
    con.execute("CREATE TABLE t AS SELECT range * 2 AS k FROM range(4000)").fetchall()
    con.execute(
        "CREATE TABLE lg AS SELECT ((hash(range) % 97) * (hash(range) % 41) * 2 + (range % 9 = 0)::INT)::BIGINT AS k "
        "FROM range(20000)"
    ).fetchall()
    con.close()
    runner = CliRunner()
    base = ["recommend", str(db), "--table", "t", "--key", "k", "--log", "lg", "--model", "bplus"]
    run = json.loads(runner.invoke(app, base + ["--json"]).stdout)
    for p in run["plans"]:
        assert p["model"] == "bplus" and p["fanout"] >= 2
        assert p["lower_bound"] <= p["optimized"]["expected_page_reads"] <= p["uniform"]["expected_page_reads"]
        assert p["geometry"]["leaf_capacity"] == p["keys_per_page"]
    for suffix in (".csv", ".parquet", ".json"):
        target = tmp_path / f"bp{suffix}"
        res = runner.invoke(app, base + ["--json", "--keys-per-page", "8", "--fanout", "5", "--export", str(target)])
        assert res.exit_code == 0, res.stderr
        (p,) = json.loads(res.stdout)["plans"]
        with load_workload(db, "t", "k", "lg") as wl:
            layout = read_layout(wl, target, 8, 5)
            assert evaluate(layout, wl.hist).expected_page_reads == pytest.approx(p["optimized"]["expected_page_reads"])
    bad = runner.invoke(app, base + ["--keys-per-page", "8"])
    assert bad.exit_code == 5 and "--fanout" in bad.stderr
    bad = runner.invoke(app, ["recommend", str(db), "--table", "t", "--key", "k", "--model", "btree+"])
    assert bad.exit_code == 2  # an unknown choice is a usage error
    scans = runner.invoke(app, base + ["--json", "--keys-per-page", "8", "--fanout", "5", "--order-column", "k"])
    assert scans.exit_code == 0, scans.stderr


def test_bplus_scan_pages_follow_the_leaf_chain():
    from advisor.scans import scan_pages

    layout = uniform_bplus(100, 10, 4)
    depth = layout.depths().max()
    # keys 5..34 touch leaves 0..3: one descent plus three more leaves
    assert scan_pages(layout, np.array([5]), np.array([34])).tolist() == [depth + 3]
    assert scan_pages(layout, np.array([12]), np.array([12])).tolist() == [depth]


@pytest.mark.parametrize("clustered", [pytest.param(False, marks=pytest.mark.slow), True])
def test_balanced_shape_properties(clustered):
    from advisor.balanced import balanced_bplus_layout
    from advisor.bufferpool import pinned_misses

    rng = np.random.default_rng(3)
    n = 5990
    # clustered: the hottest keys are consecutive but start mid-leaf (at key 10)
    ranks = (np.arange(n) - 10) % n if clustered else rng.permutation(n)
    p = np.round(1e6 / (ranks + 1.0))
    hist = Histogram(p, np.zeros(n + 1))
    uni = uniform_bplus(n, 20, 8)
    layout, sizes, _ = balanced_bplus_layout(hist, uni, [20, 60] if clustered else None)
    check_layout(layout)
    height = uni.depths().max()
    leaves = np.nonzero(layout.leaf)[0]
    assert (layout.depths()[leaves] == height).all()  # every leaf at the even split's depth
    assert evaluate(layout, hist).expected_page_reads == pytest.approx(height)
    for a, b in zip(pinned_misses(layout, hist, sizes), pinned_misses(uni, hist, sizes), strict=False):
        assert a <= b + 1e-12
    # the variable-depth optimum (near-optimal here) is no worse than the balanced shape's reads
    from advisor.planner import PlanOptions, plan_capacity

    plan = plan_capacity(hist, 20, options=PlanOptions(model="bplus", fanout=8))
    assert plan.recommended_cost.expected_page_reads <= evaluate(layout, hist).expected_page_reads + 1e-12
    if clustered:  # a misaligned hot run packs into fewer leaves: a pool of 20 or 60 pages gains
        assert pinned_misses(layout, hist, sizes)[-1] < pinned_misses(uni, hist, sizes)[-1]


@pytest.mark.slow  # several full runs: in the slow suite
def test_suffix_truncation_raises_fanout_for_string_keys(tmp_path):
    import json

    import duckdb
    from typer.testing import CliRunner

    from advisor.cli import app

    db = tmp_path / "s.duckdb"
    con = duckdb.connect(str(db))
    # long keys sharing a long prefix, differing early enough that separators stay short
    con.execute(
        "CREATE TABLE t AS SELECT 'catalogue/section-' || lpad(range::VARCHAR, 6, '0') || '/item-details' AS k "
        "FROM range(20000)"
    ).fetchall()
    con.execute("CREATE TABLE lg AS SELECT k FROM t USING SAMPLE 3000 ROWS").fetchall()
    con.close()
    base = [
        "recommend",
        str(db),
        "--table",
        "t",
        "--key",
        "k",
        "--log",
        "lg",
        "--model",
        "bplus",
        "--json",
        "--page-size",
        "4096",
    ]
    plain = json.loads(CliRunner().invoke(app, base).stdout)["plans"][0]
    short = json.loads(CliRunner().invoke(app, base + ["--truncate-separators"]).stdout)["plans"][0]
    g = short["geometry"]
    assert g["separator_bytes"] < g["key_bytes"]  # prefixes up to the differing digit, plus 2
    assert short["fanout"] > plain["fanout"] == g["untruncated_fanout"]
    assert short["optimized"]["expected_page_reads"] <= plain["optimized"]["expected_page_reads"] + 1e-12
    bad = CliRunner().invoke(
        app, ["recommend", str(db), "--table", "t", "--key", "k", "--log", "lg", "--truncate-separators"]
    )
    assert bad.exit_code == 5


def test_both_structures_side_by_side(tmp_path):
    import json

    from typer.testing import CliRunner

    from advisor.cli import app

    runner = CliRunner()
    res = runner.invoke(
        app, ["demo", "--dir", str(tmp_path), "--keys", "4000", "--lookups", "30000", "--json", "--page-size", "4096"]
    )
    assert res.exit_code == 0
    db = next(tmp_path.glob("*.duckdb"))
    args = [
        "recommend",
        str(db),
        "--table",
        "packets",
        "--key",
        "packet_no",
        "--log",
        "desk_lookups",
        "--page-size",
        "4096",
        "--model",
        "both",
        "--order-column",
        "lookup_seq",
    ]
    run = json.loads(runner.invoke(app, args + ["--json"]).stdout)
    assert [p["model"] for p in run["plans"]] == ["btree", "bplus"]
    assert "balanced" in run["plans"][1] and "balanced" not in run["plans"][0]
    rows = run["page_size_choice"]["rows"]
    assert {r["model"] for r in rows} == {"btree", "bplus"}
    assert len({r["pool_pages"] for r in rows}) == 1  # one pool in bytes for both structures
    assert run["page_size_choice"]["best_model"] in ("btree", "bplus")
    assert {r["model"] for r in run["holdout"]["rows"]} == {"btree", "bplus"}
    text = runner.invoke(app, args, env={"COLUMNS": "120"}).stdout
    assert "4,096 B+" in text and "Balanced B+-tree" in text


def _every_balanced_tree(n, L, F, height):
    """Independent brute force: (leaf runs, nested children) for every B+-tree with all leaves at
    depth ``height``, built straight into page lists and costed by its own traffic count."""

    def runs(k):
        if k == 0:
            yield []
        for first in range(1, min(L, k) + 1):
            for rest in runs(k - first):
                yield [first] + rest

    def trees(leaves, h):  # leaves: list of (lo, hi) key ranges; yields page lists [(parent_path, lo, hi)]
        if h == 1:
            if len(leaves) == 1:
                yield [leaves[0]]
            return
        m = len(leaves)
        for parts in range(2, min(F, m) + 1):
            for cuts in __import__("itertools").combinations(range(1, m), parts - 1):
                edges = (0,) + cuts + (m,)
                groups = [leaves[a:b] for a, b in zip(edges[:-1], edges[1:], strict=False)]

                def combine(gs):
                    if not gs:
                        yield []
                        return
                    for sub in trees(gs[0], h - 1):
                        for rest in combine(gs[1:]):
                            yield [sub] + rest

                for kids in combine(groups):
                    yield [(leaves[0][0], leaves[-1][1], kids)]

    for r in runs(n):
        starts = np.concatenate([[0], np.cumsum(r)]).tolist()
        leaves = list(zip(starts[:-1], starts[1:], strict=False))
        yield from trees(leaves, height)


def _traffic(tree, w):
    """Per-page traffic (weight of the keys below) of a tree from _every_balanced_tree."""
    out = []

    def walk(node):
        if isinstance(node, tuple) and len(node) == 2:
            out.append(float(sum(w[node[0] : node[1]])))
            return
        lo, hi, kids = node
        out.append(float(sum(w[lo:hi])))
        for k in kids:
            walk(k[0] if isinstance(k, list) else k)

    walk(tree[0])
    return out


@settings(max_examples=40, deadline=None)
@given(data=st.data(), L=st.integers(1, 3), F=st.integers(3, 4))
def test_balanced_shape_exact_equals_brute_force(data, L, F):
    # F >= 3 so that the even split itself has every leaf at one depth (with F = 2 it may not)
    from advisor.balanced import balanced_bplus_layout, balanced_miss_bound
    from advisor.bufferpool import pinned_misses

    n = data.draw(st.integers(2, 7))
    p = np.array(data.draw(st.lists(st.integers(0, 30), min_size=n, max_size=n)), float)
    if p.sum() == 0:
        p[0] = 1
    hist = Histogram(p, np.zeros(n + 1))
    uni = uniform_bplus(n, L, F)
    height = int(uni.depths().max())
    layout, sizes, how = balanced_bplus_layout(hist, uni, [1, 2, 3])
    assert how.startswith("exact")
    w = bplus_weights(hist)
    base = pinned_misses(uni, hist, sizes)

    def misses(tree):
        t = sorted(_traffic(tree, w), reverse=True)
        return [(height * w.sum() - sum(t[:b])) / w.sum() for b in sizes]

    trees = list(_every_balanced_tree(n, L, F, height))
    every = [misses(t) for t in trees]
    # the advice never uses more pages than the even split, nor more misses at any pool size
    allowed = [
        m
        for m, t in zip(every, trees, strict=True)
        if all(a <= b + 1e-12 for a, b in zip(m, base, strict=False)) and len(_traffic(t, w)) <= uni.pages
    ]
    assert sum(pinned_misses(layout, hist, sizes)) == pytest.approx(min(sum(m) for m in allowed), abs=1e-12)
    for i, b in enumerate(sizes):  # the bound holds for every balanced tree
        assert balanced_miss_bound(hist, L, F, height, b) <= min(m[i] for m in every) + 1e-12


def test_disjoint_runs_dp_matches_brute_force():

    from advisor.optimize.bplus_bounds import best_disjoint_windows

    rng = np.random.default_rng(0)
    for _ in range(150):
        n, L = int(rng.integers(1, 12)), int(rng.integers(1, 5))
        w = tuple(rng.integers(0, 10, n).astype(float))

        @functools.cache
        def best(i, k):
            if i >= n or k == 0:
                return 0.0
            return max(
                [best(i + 1, k)] + [sum(w[i : i + ln]) + best(i + ln, k - 1) for ln in range(1, L + 1) if i + ln <= n]
            )

        M = best_disjoint_windows(np.array(w), L, 4)
        for x in range(M.size):
            assert M[x] == pytest.approx(best(0, x))


@settings(max_examples=30, deadline=None)
@given(n=st.integers(2, 80), L=st.integers(1, 6), F=st.integers(2, 12), seed=st.integers(0, 10_000))
def test_exact_int32_tables_equal_float64(n, L, F, seed):
    hist = random_hist(np.random.default_rng(seed), n)
    fast, slow = solve_bplus_exact(hist, L, F), solve_bplus_exact(hist, L, F, integer=False)
    assert fast.objective == pytest.approx(slow.objective, rel=1e-12, abs=1e-12)
    check_layout(fast.layout)


@settings(max_examples=40, deadline=None)
@given(
    n=st.integers(2, 120),
    L=st.integers(1, 8),
    F=st.integers(2, 9),
    seed=st.integers(0, 10_000),
    cap=st.sampled_from([1.0, 50.0, 400.0]),
)
def test_window_bound_on_key_blocks_stays_below_the_optimum(n, L, F, seed, cap):
    # a tiny work cap forces the block-coarsened disjoint-run DP; it may only over-estimate
    # the answered weight, so the bound stays below the exact optimum
    hist = random_hist(np.random.default_rng(seed), n)
    best = solve_bplus_exact(hist, L, F).objective
    assert bplus_window_bound(hist, L, F, work_cap=cap) <= best + 1e-12
    assert bplus_window_bound(hist, L, F, work_cap=cap) <= bplus_window_bound(hist, L, F) + 1e-12
