"""Page and height budgets: every returned layout keeps them; bad or impossible ones are refused."""

from __future__ import annotations

import json

import duckdb
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from typer.testing import CliRunner

from advisor.budget import Budget, BudgetSpec, resolve
from advisor.cli import app
from advisor.errors import LayoutInvalid, SettingInvalid
from advisor.frontier import check_monotone, frontier
from advisor.histogram import Histogram
from advisor.layout import check_layout
from advisor.optimize import uniform_layout
from advisor.optimize.bplus import uniform_bplus
from advisor.planner import PlanOptions, plan_capacity

runner = CliRunner()


def _hist(rng, n, skew):
    w = 1.0 / np.arange(1, n + 1) ** skew
    w = w[rng.permutation(n)]
    q = np.zeros(n + 1)
    q[rng.integers(0, n + 1, max(1, n // 20))] = 3.0
    return Histogram(np.round(w * 1000), q)


def _height(layout):
    return int(layout.depths().max())


_CASES = dict(
    seed=st.integers(0, 10_000),
    n=st.integers(1, 1500),
    c=st.integers(1, 40),
    skew=st.floats(0.0, 1.6),
    model=st.sampled_from(["btree", "bplus"]),
    exact=st.sampled_from([0.0, 1.0]),  # both paths; a 1 s allowance keeps the exact one short
)


@settings(max_examples=15, deadline=None)
@given(**_CASES)
def test_default_run_never_exceeds_the_even_split(seed, n, c, skew, model, exact):
    _never_exceeds(seed, n, c, skew, model, exact)


@pytest.mark.slow
@settings(max_examples=150, deadline=None)
@given(**_CASES)
def test_default_run_never_exceeds_the_even_split_many(seed, n, c, skew, model, exact):
    _never_exceeds(seed, n, c, skew, model, exact)


def _never_exceeds(seed, n, c, skew, model, exact):
    rng = np.random.default_rng(seed)
    hist = _hist(rng, n, skew)
    F = int(rng.integers(2, 12))
    plan = plan_capacity(hist, c, options=PlanOptions(model=model, fanout=F, exact_seconds=exact))
    check_layout(plan.recommended, plan.budget)
    assert plan.recommended.pages <= plan.uniform.pages
    assert _height(plan.recommended) <= _height(plan.uniform)
    assert plan.recommended_cost.expected_page_reads <= plan.uniform_cost.expected_page_reads + 1e-12
    assert plan.lower_bound <= plan.recommended_cost.expected_page_reads + 1e-9


@pytest.mark.slow
@pytest.mark.parametrize("pages, height", [("1.25x", "even"), ("even", "even+1"), ("2x", "none"), ("none", "even")])
@pytest.mark.parametrize("model", ["btree", "bplus"])
def test_other_budgets_hold(pages, height, model):
    rng = np.random.default_rng(3)
    hist = _hist(rng, 3000, 1.0)
    plan = plan_capacity(hist, 8, options=PlanOptions(model=model, fanout=6, budget=BudgetSpec(pages, height)))
    check_layout(plan.recommended, plan.budget)
    even = plan.uniform
    if pages.endswith("x"):
        assert plan.budget.max_pages == int(even.pages * float(pages[:-1]))
    if height == "even+1":
        assert plan.budget.max_height == _height(even) + 1


def test_page_count_below_the_even_split_is_met_for_classic_trees():
    rng = np.random.default_rng(4)
    hist = _hist(rng, 2000, 1.0)
    even = uniform_layout(2000, 7)
    fewest = -(-2000 // 7)
    assert fewest < even.pages
    plan = plan_capacity(hist, 7, options=PlanOptions(exact_seconds=0, budget=BudgetSpec(str(fewest), "even")))
    assert plan.recommended.pages <= fewest


def test_budget_check_rejects_a_layout_outside_it():
    even = uniform_layout(100, 3)
    with pytest.raises(LayoutInvalid, match="pages"):
        check_layout(even, Budget(even.pages - 1, None))
    with pytest.raises(LayoutInvalid, match="levels"):
        check_layout(even, Budget(None, _height(even) - 1))
    check_layout(even, Budget(even.pages, _height(even)))


@pytest.mark.parametrize(
    "pages, height", [("0.5x", "even"), ("lots", "even"), ("even", "even-1"), ("even", "0"), ("-3", "even")]
)
def test_bad_specs_are_refused(pages, height):
    with pytest.raises(SettingInvalid):
        BudgetSpec(pages, height)


def test_impossible_budgets_are_refused():
    even = uniform_layout(100, 3)  # 100 keys, 3 per page: at least 34 pages and 4 levels
    with pytest.raises(SettingInvalid, match="at least 34"):
        resolve(BudgetSpec("33", "even"), even, 34, 4)
    with pytest.raises(SettingInvalid, match="at least 4"):
        resolve(BudgetSpec("even", "3"), even, 34, 4)
    assert resolve(BudgetSpec("34", "4"), even, 34, 4) == Budget(34, 4)
    bplus = uniform_bplus(100, 3, 4)
    assert resolve(BudgetSpec("none", "none"), bplus, bplus.pages, 4) == Budget(None, None)


@pytest.mark.slow  # several full runs: in the slow suite
def test_frontier_never_rises_with_more_budget():
    rng = np.random.default_rng(5)
    hist = _hist(rng, 4000, 1.1)
    for model in ("btree", "bplus"):
        opts = PlanOptions(model=model, fanout=10, exact_seconds=0)
        plan = plan_capacity(hist, 10, options=opts)
        rows = frontier(plan, hist, opts)
        assert check_monotone(rows)
        assert [r["max_pages_rule"] for r in rows] == ["even", "1.1x", "1.25x", "1.5x", "2x", "none"]
        assert rows[0]["expected_page_reads"] == pytest.approx(plan.recommended_cost.expected_page_reads)
        for r in rows:
            assert r["max_pages"] is None or r["pages"] <= r["max_pages"]
            assert r["height"] <= _height(plan.uniform)


@pytest.fixture(scope="module")
def db(tmp_path_factory):
    path = tmp_path_factory.mktemp("b") / "b.duckdb"
    con = duckdb.connect(str(path))
    con.execute("CREATE TABLE t AS SELECT range * 2 AS k FROM range(900)").fetchall()
    con.execute(
        "CREATE TABLE lg AS SELECT ((hash(range) % 40) * (hash(range) % 23) * 2)::BIGINT AS k FROM range(6000)"
    ).fetchall()
    con.close()
    return path


def _plan(db, *extra):
    return runner.invoke(
        app,
        ["recommend", str(db), "--table", "t", "--key", "k", "--log", "lg", "--keys-per-page", "6", *extra],
        env={"COLUMNS": "100"},
    )


@pytest.mark.slow  # several full runs: in the slow suite
def test_cli_budget_fields_and_frontier(db):
    res = _plan(db, "--json", "--exact-seconds", "1")  # the fields, not the exact path (tested elsewhere)
    assert res.exit_code == 0, res.stderr
    plan = json.loads(res.stdout)["plans"][0]
    assert plan["budget"] == {"max_pages": plan["uniform"]["pages"], "max_height": plan["uniform"]["height"]}
    for layout in (plan["optimized"], plan["uniform"]):
        assert {"bytes", "mean_fill", "p99_page_reads", "max_page_reads"} <= set(layout)
        assert layout["p99_page_reads"] <= layout["max_page_reads"] <= layout["height"]
    assert plan["optimized"]["pages"] <= plan["uniform"]["pages"]
    rules = [r["max_pages_rule"] for r in plan["frontier"]]
    assert rules == ["even", "1.1x", "1.25x", "1.5x", "2x", "none"]
    loose = json.loads(
        _plan(db, "--json", "--max-pages", "none", "--max-height", "none", "--exact-seconds", "1").stdout
    )["plans"][0]
    assert loose["budget"] == {"max_pages": None, "max_height": None}
    assert loose["optimized"]["expected_page_reads"] <= plan["optimized"]["expected_page_reads"] + 1e-12


@pytest.mark.parametrize(
    "args, words",
    [
        (["--max-pages", "10"], ["--max-pages", "at least 150"]),
        (["--max-height", "2"], ["--max-height", "at least 4"]),
        (["--max-pages", "half"], ["--max-pages must be"]),
    ],
)
def test_cli_impossible_or_bad_budget_is_one_line_exit_5(db, args, words):
    res = _plan(db, *args)
    assert res.exit_code == 5, (res.stdout, res.stderr)
    err = res.stderr.strip()
    assert len(err.splitlines()) == 1 and "Traceback" not in err
    for w in words:
        assert w in err


@pytest.mark.slow  # several full runs
def test_fill_factor_sets_the_classic_baseline_and_its_budget():
    """A bulk loader's fill factor (common practice: leaves well short of full) makes the even
    split larger; the default budget is that baseline's size, which the advice may fill."""
    rng = np.random.default_rng(8)
    hist = _hist(rng, 5_000, 1.0)
    full = plan_capacity(hist, 50, options=PlanOptions(exact_seconds=0))
    part = plan_capacity(hist, 50, options=PlanOptions(exact_seconds=0, leaf_fill=0.8))
    assert part.uniform.pages > full.uniform.pages and part.uniform.page_sizes().max() <= 40
    check_layout(part.recommended, part.budget)
    assert part.budget.max_pages == part.uniform.pages
    assert part.recommended.page_sizes().max() <= 50  # the advice may fill its pages
    assert part.recommended_cost.expected_page_reads <= full.recommended_cost.expected_page_reads + 1e-12


@pytest.mark.slow  # several full runs: in the slow suite
def test_fill_factors_of_leaves_and_internal_pages_in_both_even_splits():
    """A bulk loader fills leaves and internal pages to their own fill factors (common practice:
    leaves short of full, internal pages fuller, or the reverse); the even split keeps the page's
    slot count as its capacity, so its mean fill shows the loader's fill."""
    from advisor.layout import mean_fill
    from advisor.optimize.bplus import uniform_bplus

    n, c = 20_000, 40
    classic = uniform_layout(n, c, leaf_keys=30, internal_keys=20)
    check_layout(classic)
    sizes, leaf = classic.page_sizes(), ~np.isin(np.arange(classic.pages), classic.parent)
    assert classic.capacity == c and sizes[leaf].max() <= 30 and sizes[~leaf].max() <= 20
    # fewer keys per leaf: about n / 31 leaves at least (each leaf and one separator beside it)
    assert int(leaf.sum()) >= n // 31
    assert mean_fill(classic) <= 0.76
    bplus = uniform_bplus(n, c, 16, leaf_keys=30, children=12)
    check_layout(bplus)
    bsizes = bplus.page_sizes()
    assert bsizes[bplus.leaf].max() == 30 and int(bplus.leaf.sum()) == -(-n // 30)
    assert (bsizes[~bplus.leaf] + 1).max() <= 12  # children per internal page
    assert bplus.capacity == c and bplus.fanout == 16
    # the plan: the advice may fill pages, the budget is the filled baseline's size
    rng = np.random.default_rng(9)
    hist = _hist(rng, 3_000, 1.0)
    for model, fanout in (("btree", 0), ("bplus", 8)):
        full = plan_capacity(hist, 20, options=PlanOptions(exact_seconds=0, model=model, fanout=fanout))
        part = plan_capacity(
            hist, 20, options=PlanOptions(exact_seconds=0, model=model, fanout=fanout, leaf_fill=0.7, internal_fill=0.9)
        )
        assert (part.leaf_fill, part.internal_fill) == (0.7, 0.9)
        assert part.uniform.pages > full.uniform.pages
        uni = part.uniform
        leaves = uni.leaf if uni.leaf is not None else ~np.isin(np.arange(uni.pages), uni.parent)
        assert uni.page_sizes()[leaves].max() <= 14
        check_layout(part.recommended, part.budget)
        assert part.recommended_cost.expected_page_reads <= full.recommended_cost.expected_page_reads + 1e-12


@pytest.mark.slow
def test_pilot_construction_keeps_the_budget_and_beats_every_plain_variant():
    """The pilot method (Duin & Voss, Networks 34, 1999) never does worse than the heuristic
    it completes with: at each page it tries every variant's page, and a variant's own page
    completed by the cheapest variant per child costs at most that variant's whole subtree; by
    induction the tree costs at most every plain (non-carving) variant's. Checked on random
    workloads with the evaluator, and every tree within its page and height budget."""
    from advisor.layout import evaluate
    from advisor.optimize.uniform import min_height
    from advisor.optimize.within import PILOT_VARIANTS, fewest_pages, pilot_layout, within_budget_layout

    rng = np.random.default_rng(7)
    plain = [v[:3] for v in PILOT_VARIANTS if not v[3]]
    for it in range(60):
        c = int(rng.integers(1, 25))
        n = int(rng.integers(c + 1, 1500))
        p = rng.random(n) ** 5 * (rng.random(n) < 0.7)
        if it % 4 == 0:  # hot keys side by side
            p = np.zeros(n)
            start = int(rng.integers(0, n))
            p[start : start + 40] = rng.random(min(40, n - start)) + 1
        hist = Histogram(p, rng.random(n + 1) * 0.05)
        height = min_height(n, c) + int(rng.integers(0, 2))
        pages = fewest_pages(n, c) + int(rng.integers(0, n // c + 1))
        tree = pilot_layout(hist, c, pages, height, height)
        check_layout(tree, Budget(pages, height))
        cost = evaluate(tree, hist).expected_page_reads
        for tries, fill_first, hot_share in plain:
            other = within_budget_layout(hist, c, pages, height, tries, fill_first, hot_share)
            assert cost <= evaluate(other, hist).expected_page_reads + 1e-9
