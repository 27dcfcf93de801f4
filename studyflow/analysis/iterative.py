"""Iterative convergence of each case from its histories, and the iterative-error check.

Histories are the tidy table of DEVELOPERS.md: ``study, case, point, level, quantity, iteration,
value``. Everything here is grouped pandas arithmetic (no Python loop over cases).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from numpy.typing import ArrayLike, NDArray

WINDOW_FRACTION = 0.1  # last 10 % of the iterations ...
WINDOW_MIN = 5  # ... but at least 5 of them
NEGLIGIBLE = 0.01  # iterative error under 1 % of U counts as negligible (common practice)
# A residual whose largest value stays below this share of the largest value of another residual
# of the same case sat at round-off level the whole run (a Newton solver satisfies continuity to
# machine precision from its first step): its "drop" measures noise, not convergence. Our choice.
ROUNDOFF_SHARE = 1e-10

_KEYS = ["case", "quantity"]


def _ordered(histories: pd.DataFrame, quantities: list[str] | None) -> pd.DataFrame:
    h = histories if quantities is None else histories[histories["quantity"].isin(quantities)]
    h = h[np.isfinite(h["value"].to_numpy(dtype=float))]
    return h.sort_values(_KEYS + ["iteration"], kind="stable")


def residual_summary(histories: pd.DataFrame, residuals: list[str]) -> pd.DataFrame:
    """Per case and residual: first and final value, orders of magnitude of drop, final normalised residual.

    drop = log10(r_peak / r_final) and normalised final residual = r_final / r_peak, where
    r_peak is the largest recorded value (our documented choice: solvers differ in how they
    normalise, and the first value can be zero, e.g. a continuity imbalance of a uniform start
    field, while the peak is always a meaningful reference). ``roundoff`` marks a residual whose
    peak is at most ``ROUNDOFF_SHARE`` times the largest peak among the case's residuals: it was
    at round-off level throughout, and its drop is no measure of convergence. Columns: ``case,
    point, level, quantity, iterations, first, peak, final, drop_orders, final_normalised,
    roundoff``.
    """
    h = _ordered(histories, residuals)
    if h.empty:
        return pd.DataFrame(columns=["case", "point", "level", "quantity", "iterations", "first", "peak", "final",
                                     "drop_orders", "final_normalised", "roundoff"])
    g = h.assign(absval=h["value"].abs()).groupby(_KEYS, sort=True)
    out = g.agg(point=("point", "first"), level=("level", "first"), iterations=("iteration", "max"),
                first=("absval", "first"), peak=("absval", "max"), final=("absval", "last")).reset_index()
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = out["final"].to_numpy(float) / out["peak"].to_numpy(float)
        out["drop_orders"] = -np.log10(ratio)
    out["final_normalised"] = ratio
    case_peak = out.groupby("case")["peak"].transform("max").to_numpy(float)
    out["roundoff"] = out["peak"].to_numpy(float) <= ROUNDOFF_SHARE * case_peak
    return out


def monitor_error(histories: pd.DataFrame, quantities: list[str] | None = None,
                  fraction: float = WINDOW_FRACTION, minimum: int = WINDOW_MIN) -> pd.DataFrame:
    """Iterative-error estimate of monitored quantities from their histories.

    Rule (our documented choice, in line with common practice): over the last
    max(minimum, ceil(fraction * n)) recorded iterations (capped at n), the iterative error is
    half the range, (max - min) / 2. A history still drifting steadily is thus charged with its
    drift over the window, which underestimates the remaining error when convergence is slow;
    read it together with the residual drop. Columns: ``case, point, level, quantity,
    iterative_error, window, final``.
    """
    h = _ordered(histories, quantities)
    if h.empty:
        return pd.DataFrame(columns=["case", "point", "level", "quantity", "iterative_error", "window", "final"])
    grp = h.groupby(_KEYS, sort=False)
    n = grp["value"].transform("size").to_numpy()
    from_end = grp.cumcount(ascending=False).to_numpy()
    window = np.minimum(n, np.maximum(minimum, np.ceil(fraction * n))).astype(int)
    tail = h[from_end < window].assign(window=window[from_end < window])
    g = tail.groupby(_KEYS, sort=True)
    out = g.agg(point=("point", "first"), level=("level", "first"), vmax=("value", "max"),
                vmin=("value", "min"), final=("value", "last"), window=("window", "first")).reset_index()
    out["iterative_error"] = 0.5 * (out["vmax"] - out["vmin"])
    return out.drop(columns=["vmax", "vmin"])


def iterative_negligible(iterative_error: ArrayLike, U: ArrayLike, share: float = NEGLIGIBLE) -> NDArray[np.object_]:
    """True where the iterative error is under ``share`` (1 %) of U, False where not, None when unknown.

    Rule: iterative error < 0.01 U (common practice: the iterative error should be one to two
    orders of magnitude below the discretization uncertainty so it does not pollute it).
    U = 0 with zero iterative error counts as negligible.
    """
    e = np.asarray(iterative_error, dtype=float)
    u = np.asarray(U, dtype=float)
    known = np.isfinite(e) & np.isfinite(u)
    ok = (e < share * u) | ((e == 0) & (u == 0))
    return np.where(known, ok, None).astype(object)
