"""Analysis layer: observed order, Richardson extrapolation, GCI, least squares, iterative error.

Small pure numerical functions (``sizes``, ``richardson``, ``leastsquares``, ``iterative``) work on
arrays shaped ``(n_groups, n_levels)``; ``table.assess`` groups the tidy results table and calls them.
"""

from .richardson import ThreeLevel, TwoLevel, apparent_order, classify_convergence, three_level, two_level
from .sizes import refinement_ratios, representative_size, sort_fine_first

__all__ = [
    "ThreeLevel",
    "TwoLevel",
    "apparent_order",
    "classify_convergence",
    "refinement_ratios",
    "representative_size",
    "sort_fine_first",
    "three_level",
    "two_level",
]
