"""Optimisers behind one plain interface: histogram + capacity in, layout out.

``solve_exact`` (proven optimum, the textbook multiway DP), ``balanced_layout`` (near-optimal,
any size), ``uniform_layout`` (the even-split baseline) and ``lower_bounds``.
"""

from .bounds import entropy_bound, level_capacity_bound, lower_bounds
from .exact import exact_work, solve_exact
from .near import balanced_layout, heaviest_first_layout
from .uniform import min_height, uniform_layout

__all__ = [
    "balanced_layout",
    "entropy_bound",
    "exact_work",
    "heaviest_first_layout",
    "level_capacity_bound",
    "lower_bounds",
    "min_height",
    "solve_exact",
    "uniform_layout",
]
