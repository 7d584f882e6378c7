"""The layout invariant check, the even-split baseline and the evaluator."""

from __future__ import annotations

import math

import numpy as np
import pytest

from advisor.errors import LayoutInvalid
from advisor.histogram import Histogram
from advisor.layout import LayoutBuilder, check_layout, evaluate
from advisor.optimize import min_height, uniform_layout

from .conftest import random_hist, replay_cost


def _two_level(n_left_child_keys=(0, 1)):
    b = LayoutBuilder(5, 2)
    root = b.add(np.array([2]))
    b.add(np.array(n_left_child_keys), root, 0)
    b.add(np.array([3, 4]), root, 1)
    return b


def test_valid_small_layout_and_costs():
    layout = _two_level().build()
    check_layout(layout)
    hist = Histogram(np.array([1, 1, 5, 1, 1.0]), np.array([1, 0, 0, 0, 0, 2.0]))
    cost = evaluate(layout, hist)
    # keys 0,1,3,4 at depth 2, key 2 at depth 1; gap 0 and gap 5 at depth 2
    assert cost.expected_page_reads == pytest.approx((5 * 1 + 4 * 2 + 1 * 2 + 2 * 2) / 12)
    assert cost.height == 2 and cost.pages == 3
    assert cost.answered_at_depth.tolist() == pytest.approx([5 / 12, 7 / 12])


@pytest.mark.parametrize(
    "mutate, message",
    [
        (lambda b: b.add(np.array([0]), 0, 0), "slot|once"),
        (lambda b: None, None),
    ],
)
def test_check_layout_detects_shared_slots(mutate, message):
    b = _two_level()
    mutate(b)
    if message is None:
        check_layout(b.build())
    else:
        with pytest.raises(LayoutInvalid):
            check_layout(b.build())


def test_check_layout_detects_broken_order_and_capacity():
    b = LayoutBuilder(5, 2)
    root = b.add(np.array([2]))
    b.add(np.array([3, 4]), root, 0)  # right-hand keys in the left slot
    b.add(np.array([0, 1]), root, 1)
    with pytest.raises(LayoutInvalid, match="slot"):
        check_layout(b.build())
    b = LayoutBuilder(3, 2)
    b.add(np.array([0, 1, 2]))
    with pytest.raises(LayoutInvalid, match="holds"):
        check_layout(b.build())
    b = LayoutBuilder(3, 3)
    b.add(np.array([0, 2]))
    with pytest.raises(LayoutInvalid, match="exactly once"):
        check_layout(b.build())
    b = LayoutBuilder(3, 3)
    b.add(np.array([2, 1, 0]))
    with pytest.raises(LayoutInvalid):
        check_layout(b.build())


@pytest.mark.parametrize("n", [0, 1, 2, 5, 17, 100, 1000, 12345])
@pytest.mark.parametrize("c", [1, 2, 3, 10, 64])
def test_uniform_has_minimum_height(n, c):
    layout = uniform_layout(n, c)
    check_layout(layout)
    hist = Histogram(np.ones(n), np.zeros(n + 1))
    cost = evaluate(layout, hist)
    # textbook minimum height of a B-tree with c keys per page: ceil(log_{c+1}(n + 1))
    assert cost.height == (math.ceil(math.log(n + 1, c + 1) - 1e-12) if n else 0)
    assert cost.height == min_height(n, c)
    if n:
        sizes = layout.page_sizes()
        # the even split's definition: the runs under each page differ in size by at most one,
        # so sibling leaves (pages with no children) differ by at most one key
        leaves = np.setdiff1d(np.arange(layout.pages), layout.parent)
        for parent in np.unique(layout.parent[leaves]):
            sib = leaves[layout.parent[leaves] == parent]
            if parent >= 0 and sib.size == np.sum(layout.parent == parent):
                assert sizes[sib].max() - sizes[sib].min() <= 1


@pytest.mark.parametrize("seed", range(8))
def test_evaluator_agrees_with_search_replay(seed):
    rng = np.random.default_rng(seed)
    hist = random_hist(rng, int(rng.integers(1, 400)))
    for c in (1, 3, 20):
        layout = uniform_layout(hist.n, c)
        assert evaluate(layout, hist).expected_page_reads == pytest.approx(replay_cost(layout, hist), rel=1e-12)
