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


def _sig3(values: NDArray) -> NDArray[np.object_]:
    """Each value as text with three significant digits ("%.3g"), as an object array.

    Values are rounded to three significant digits numerically first, so only the distinct
    rounded values are formatted (a table of 100,000 rows has a few hundred of them).
    """
    x = np.asarray(values, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        scale = 10.0 ** (np.floor(np.log10(np.abs(x))) - 2)
        rounded = np.where(np.isfinite(scale) & (scale > 0), np.round(x / scale) * scale, x)
    uniq, inverse = np.unique(rounded, return_inverse=True)
    return np.array([f"{u:.3g}" for u in uniq], dtype=object)[inverse.reshape(-1)]


def append(reason: NDArray, mask: NDArray, texts: list[str] | str) -> NDArray:
    """``reason`` with '; ' + text appended where ``mask`` holds (texts: one per masked row, or one)."""
    out = reason.copy()
    idx = np.flatnonzero(mask)
    if idx.size:
        add = [texts] * idx.size if isinstance(texts, str) else texts
        out[idx] = [f"{r}; {t}" for r, t in zip(reason[idx], add)]
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
    verdicts = [CANNOT, FLAT, TWO, INDETERMINATE, NOT_ASYMPTOTIC, DIVERGING, OSCILLATORY, BELOW_FORMAL,
                NOT_ASYMPTOTIC, ASYMPTOTIC]
    tol_s = f"{100 * tolerance:.0f} %"
    pf_s = f"{pf:.3g}"
    # Reason text per rule; each is formatted only for the rows the rule decides.
    g = _sig3
    texts = [
        lambda i: problem[i],
        lambda i: "every difference between levels is within the noise threshold " + g(tiny[i]),
        lambda i: np.full(len(i), f"two levels: GCI with the formal order {pf_s} and Fs = 3; refine once more "
                                  "to observe the order", dtype=object),
        lambda i: "a difference between levels is within the noise threshold " + g(tiny[i])
                  + "; U = 3 x the spread of the values",
        lambda i: "least-squares scatter sigma = " + g(sigma[i]) + " is not below the data range "
                  + g(data_range[i]) + "; U = 3 sigma / range x (error + sigma + misfit)",
        lambda i: "R = " + g(R[i]) + ": the differences grow as the mesh is refined; no uncertainty estimate",
        lambda i: "R = " + g(R[i]) + ": the differences change sign; GCI from the apparent order p = "
                  + g(order[i]),
        lambda i: "observed order " + g(order[i]) + f" is below the formal order {pf_s} by more than {tol_s}",
        lambda i: "observed order " + g(order[i]) + f" is above the formal order {pf_s} by more than {tol_s}",
        lambda i: "observed order " + g(order[i]) + f" is within {tol_s} of the formal order {pf_s}",
    ]
    code = np.select(conds, list(range(len(conds))), default=len(conds))
    verdict = np.asarray(verdicts, dtype=object)[code]
    reason = np.empty(code.shape, dtype=object)
    for k, text in enumerate(texts):
        idx = np.flatnonzero(code == k)
        if idx.size:
            reason[idx] = text(idx)
    return verdict, reason
