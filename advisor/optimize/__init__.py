"""Optimisers behind one plain interface: histogram + capacity in, layout out.

``solve_exact`` (proven optimum, the textbook multiway DP), ``balanced_layout`` (near-optimal,
any size), ``uniform_layout`` (the even-split baseline) and ``lower_bounds``.
"""

from .bounds import entropy_bound, level_capacity_bound, lower_bounds, root_runs_bound
from .exact import exact_seconds, exact_work, forest_chain, integer_weights, solve_exact, solve_textbook, textbook_work
from .near import balanced_layout, heaviest_first_layout, hot_first_layout, polish
from .uniform import min_height, uniform_layout

__all__ = [
    "balanced_layout",
    "entropy_bound",
    "exact_work",
    "exact_seconds",
    "forest_chain",
    "integer_weights",
    "solve_textbook",
    "textbook_work",
    "heaviest_first_layout",
    "hot_first_layout",
    "polish",
    "level_capacity_bound",
    "lower_bounds",
    "root_runs_bound",
    "min_height",
    "solve_exact",
    "uniform_layout",
]
