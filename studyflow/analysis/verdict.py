"""Plain-word verdict and reason per assessed quantity, decided for all rows at once.

The rules are ours (documented here), built on the published procedures:
- fewer than two usable levels: "cannot assess";
- every difference between levels within the noise threshold: "no discernible mesh dependence";
- two levels: "order assumed: two levels only" (GCI with the formal order and Fs = 3);
- three levels with a difference within the noise: "indeterminate";
- least squares whose scatter is not below the data range: "not yet asymptotic: refine further";
- three levels: "diverging" for |R| >= 1 (or the unequal-ratio bound), "oscillatory" for -1 < R < 0;
- otherwise the observed order p against the formal order p_f with a relative tolerance
  (default 25 %, our choice): below -> "observed order below formal", above -> "not yet
  asymptotic: refine further", within -> "in the asymptotic range".
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

CANNOT = "cannot assess"
FLAT = "no discernible mesh dependence"
TWO = "order assumed: two levels only"
INDETERMINATE = "indeterminate"
NOT_ASYMPTOTIC = "not yet asymptotic: refine further"
DIVERGING = "diverging"
OSCILLATORY = "oscillatory"
BELOW_FORMAL = "observed order below formal"
ASYMPTOTIC = "in the asymptotic range"

ORDER_TOLERANCE = 0.25


def fmt(values: NDArray) -> NDArray[np.str_]:
    """Three significant digits for every entry (vectorised printf)."""
    return np.char.mod("%.3g", np.asarray(values, dtype=float))


def _cat(*parts: object) -> NDArray[np.str_]:
    out = np.asarray(parts[0]).astype(str)
    for p in parts[1:]:
        out = np.char.add(out, np.asarray(p).astype(str))
    return out


def judge(
    *,
    method: NDArray,
    flat: NDArray,
    convergence: NDArray,
    order: NDArray,
    formal_order: float,
    R: NDArray,
    tiny: NDArray,
    sigma: NDArray,
    data_range: NDArray,
    good_fit: NDArray,
    problem: NDArray,
    tolerance: float = ORDER_TOLERANCE,
) -> tuple[NDArray[np.str_], NDArray[np.str_]]:
    """Verdict and reason arrays for every row (see the module docstring for the rules)."""
    pf = float(formal_order)
    p_s, pf_s, R_s = fmt(order), fmt(pf), fmt(R)
    none = method == "none"
    two = method == "two-level"
    ls = method == "least-squares"
    three = method == "three-level"
    low = order < pf * (1.0 - tolerance)
    high = order > pf * (1.0 + tolerance)
    conds = [
        none,
        flat,
        two,
        convergence == "indeterminate",
        ls & ~good_fit,
        three & (convergence == "divergent"),
        three & (convergence == "oscillatory"),
        low,
        high,
    ]
    verdicts = [CANNOT, FLAT, TWO, INDETERMINATE, NOT_ASYMPTOTIC, DIVERGING, OSCILLATORY, BELOW_FORMAL, NOT_ASYMPTOTIC]
    tol_s = f"{100 * tolerance:.0f} %"
    reasons = [
        problem,
        _cat("every difference between levels is within the noise threshold ", fmt(tiny)),
        _cat("two levels: GCI with the formal order ", pf_s, " and Fs = 3; refine once more to observe the order"),
        _cat("a difference between levels is within the noise threshold ", fmt(tiny),
             "; U = 3 x the spread of the values"),
        _cat("least-squares scatter sigma = ", fmt(sigma), " is not below the data range ", fmt(data_range),
             "; U = 3 sigma / range x (error + sigma + misfit)"),
        _cat("R = ", R_s, ": the differences grow as the mesh is refined; no uncertainty estimate"),
        _cat("R = ", R_s, ": the differences change sign; GCI from the apparent order p = ", p_s),
        _cat("observed order ", p_s, " is below the formal order ", pf_s, " by more than ", tol_s),
        _cat("observed order ", p_s, " is above the formal order ", pf_s, " by more than ", tol_s),
    ]
    verdict = np.select(conds, verdicts, default=ASYMPTOTIC).astype(object)
    reason = np.select(conds, reasons, default=_cat("observed order ", p_s, " is within ", tol_s,
                                                    " of the formal order ", pf_s))
    return verdict, reason.astype(object)
