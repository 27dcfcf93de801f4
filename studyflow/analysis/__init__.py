"""Analysis layer: observed order, Richardson extrapolation, GCI, least squares, iterative error.

Small pure numerical functions (``sizes``, ``richardson``, ``leastsquares``, ``iterative``) work on
arrays shaped ``(n_groups, n_levels)``; ``table.assess`` groups the tidy results table and calls
them; ``study.assess_study`` reads a collected study and writes its uncertainty table.

Public functions (import them from here):

- ``assess(results, histories=None, formal_order=None, *, study=None, ...) -> DataFrame``
- ``assess_study(path, formal_order=None, write=True) -> StudyAssessment``
- ``read_level_csv(path, value=, size=, groups=) -> DataFrame`` (tidy rows for ``assess``)
- ``profile_summary(uncertainty)``, ``profile_band(uncertainty)``, ``residual_summary(histories, residuals)``,
  ``monitor_error(histories)``, ``uncertainty_text(uncertainty)``
- numerical: ``three_level``, ``two_level``, ``apparent_order``, ``classify_convergence``,
  ``least_squares_uncertainty``, ``fit_power_law``, ``fit_fixed_orders``, ``representative_size``
"""

from .iterative import iterative_negligible, monitor_error, residual_summary
from .leastsquares import fit_fixed_orders, fit_power_law, least_squares_uncertainty
from .levelcsv import read_level_csv
from .richardson import ThreeLevel, TwoLevel, apparent_order, classify_convergence, three_level, two_level
from .sizes import refinement_ratios, representative_size, sort_fine_first
from .table import COLUMNS, Settings, assess, profile_band, profile_summary
from .text import CAUTIONS, uncertainty_text


def __getattr__(name: str):
    # The study-level entry point imports the collection layer (slow: field readers); only load it
    # when asked for, so the numerical functions stay quick to import.
    if name in ("assess_study", "StudyAssessment"):
        from . import study

        return getattr(study, name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


__all__ = [
    "CAUTIONS", "COLUMNS", "Settings", "StudyAssessment", "ThreeLevel", "TwoLevel", "apparent_order", "assess", "assess_study",
    "classify_convergence", "fit_fixed_orders", "fit_power_law", "iterative_negligible",
    "least_squares_uncertainty", "monitor_error", "profile_band", "profile_summary", "read_level_csv", "refinement_ratios",
    "representative_size", "residual_summary", "sort_fine_first", "three_level", "two_level",
    "uncertainty_text",
]
