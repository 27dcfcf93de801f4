"""The uncertainty table: group the tidy results table and assess every group at once.

Groups are (point, quantity, coord): one per scalar quantity of each parameter point and one per
station of each profile. Rows with ``status == done`` only. Levels are pivoted into
``(n_groups, n_levels)`` arrays bucketed by their number of levels, and each bucket goes through
the vectorised functions of ``richardson`` and ``leastsquares`` in one call.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, replace
from typing import Any

import numpy as np
import pandas as pd

from ..collect.columns import CASE_COLUMNS, RESULT_TAIL
from ..errors import AnalysisError, InputError, Problem
from . import verdict as vd
from .iterative import NEGLIGIBLE, iterative_negligible, monitor_error
from .leastsquares import least_squares_uncertainty
from .richardson import (
    DEFAULT_RTOL,
    FS_THREE_LEVEL,
    FS_TWO_LEVEL,
    asymptotic_ratio,
    gci_relative,
    noise_threshold,
    three_level,
    two_level,
)
from .sizes import representative_size

COLUMNS = [
    "point", "quantity", "coord", "levels", "h_fine", "value_fine", "order", "extrapolated", "e_a", "e_ext",
    "gci_fine", "gci_medium", "asymptotic_ratio", "convergence", "R", "method", "U", "u_num",
    "iterative_error", "iterative_ok", "verdict", "reason",
]
TIDY = {*CASE_COLUMNS, *RESULT_TAIL, "row"}

# Divisor from the expanded uncertainty U (GCI-like, Fs = 1.25) to a standard uncertainty u_num.
# From memory: ASME V&V 20-2009 (section 2-4) regards the GCI with Fs = 1.25 as roughly 95 %
# coverage and suggests u_num = U / 1.15 (not checked against the standard). With Fs = 3 the
# same divisor is used, which is conservative. Override with ``coverage=``.
COVERAGE = 1.15


@dataclass(frozen=True)
class Settings:
    """Knobs of the assessment; defaults are the published ones where there is one."""

    formal_order: float = 2.0
    fs: float = FS_THREE_LEVEL
    fs_two: float = FS_TWO_LEVEL
    coverage: float = COVERAGE
    order_tolerance: float = vd.ORDER_TOLERANCE
    negligible: float = NEGLIGIBLE
    rtol: float = DEFAULT_RTOL
    weighted: bool = False  # least squares: also try the weighted fits (Eca & Hoekstra 2014)
    # iterative error from the last ``window`` iterations of a monitored history; None: the
    # default rule of ``iterative.monitor_error`` (last 10 %, at least 5)
    window: int | None = None


def _problems_frame_to_error(problems: list[Problem], source: str) -> AnalysisError:
    err = AnalysisError("\n".join([f"{source}: the data cannot be assessed:"] + [f"  - {p}" for p in problems]))
    err.problems = problems  # type: ignore[attr-defined]
    return err


def _row_label(df: pd.DataFrame) -> pd.Series:
    if "row" in df.columns:
        return df["row"].astype(str)
    return "row " + df.index.astype(str).to_series(index=df.index)


def prepare(results: pd.DataFrame, *, dim: int | None = None, measure: float = 1.0, source: str = "results",
            strict: bool = False) -> tuple[pd.DataFrame, pd.DataFrame, list[Problem]]:
    """Usable rows with a group id, the per-group table, and the problems found.

    Checks (each becomes a Problem naming the source, the column and row, and the value):
    missing mesh size, non-positive size, non-finite value, duplicate level within a group,
    fewer than two levels. ``strict`` raises one AnalysisError with all of them; otherwise bad
    rows are dropped (the group is still assessed on the rest, with a note), groups with a
    duplicate level or fewer than two levels are kept as "cannot assess" rows with the reason.
    """
    missing = [c for c in ("point", "quantity", "value") if c not in results.columns]
    if "h" not in results.columns and "cells" not in results.columns:
        missing.append("h or cells")
    if missing:
        raise InputError([Problem(source, c, list(results.columns), "required column missing") for c in missing])
    # Only the columns the assessment reads: every further column would be copied by each sort/take.
    used = [c for c in ("point", "quantity", "kind", "coord", "value", "h", "cells", "level", "case", "converged",
                        "row") if c in results.columns]
    df = results[used]
    keep = np.ones(len(results), dtype=bool)
    if "status" in results.columns:
        keep &= (results["status"].astype(str) == "done").to_numpy()
    if "kind" in results.columns:
        # A history's final value is an iterative monitor, not a mesh-dependent result to assess.
        keep &= (results["kind"].astype(str) != "history").to_numpy()
    df = df[keep]
    df = df.copy()
    df["point"] = df["point"].astype(str)
    df["quantity"] = df["quantity"].astype(str)
    kind = df["kind"].astype(str) if "kind" in df.columns else pd.Series("scalar", index=df.index)
    coord = df["coord"].astype(float) if "coord" in df.columns else pd.Series(np.nan, index=df.index)
    df["coord"] = np.where(kind.to_numpy() == "profile", coord.to_numpy(), np.nan)
    df["value"] = pd.to_numeric(df["value"], errors="coerce").astype(float)
    h = df["h"].astype(float).to_numpy() if "h" in df.columns else np.full(len(df), np.nan)
    size_col = np.where(np.isfinite(h), "h", "cells")
    if "cells" in df.columns:
        cells = pd.to_numeric(df["cells"], errors="coerce").astype(float).to_numpy()
        need = ~np.isfinite(h)
        if need.any():
            if dim is None:
                raise InputError(Problem(source, "cells", None,
                                         "h is not given, so the dimension is needed to compute h = (V/N)^(1/d)"))
            with np.errstate(invalid="ignore", divide="ignore"):
                h = np.where(need, representative_size(np.where(cells > 0, cells, np.nan), measure, dim), h)
            h = np.where(need & (cells <= 0), -1.0, h)  # keeps the row flagged as non-positive below
    df["h"] = h
    df["size_col"] = size_col
    raw_size = np.where(size_col == "h", df["h"], df["cells"] if "cells" in df.columns else np.nan)

    problems: list[Problem] = []
    bad_size = ~(np.isfinite(h) & (h > 0))
    bad_val = ~np.isfinite(df["value"].to_numpy())
    label = _row_label(df) if (bad_size | bad_val).any() else None
    for i in np.flatnonzero(bad_size):
        problems.append(Problem(source, f"{size_col[i]}, {label.iat[i]}", float(raw_size[i]),
                                "mesh size must be a positive finite number"))
    for i in np.flatnonzero(bad_val):
        problems.append(Problem(source, f"value, {label.iat[i]}", float(df["value"].iat[i]), "value is not finite"))
    bad_row = bad_size | bad_val

    keys = ["point", "quantity", "coord"]
    df["gid"] = df.groupby(keys, dropna=False, sort=True).ngroup()
    groups = df.drop_duplicates("gid").set_index("gid")[["point", "quantity", "coord"]].sort_index()
    groups["problem"] = ""  # why a group cannot be assessed
    groups["note"] = ""  # what was left out of a group that is still assessed

    def add(column: str, gids: np.ndarray, text: str) -> None:
        cur = groups.loc[gids, column].to_numpy(dtype=object)
        groups.loc[gids, column] = np.where(cur == "", text, cur + "; " + text)

    if bad_row.any():
        add("note", np.unique(df["gid"].to_numpy()[bad_row]), "rows with a bad size or value were left out")
    good = df[~bad_row]
    level_key = "level" if "level" in good.columns else "h"
    dup = good.duplicated(["gid", level_key], keep=False) | good.duplicated(["gid", "h"], keep=False)
    if dup.any():
        d = good[dup]
        labels = _row_label(d)
        for i in range(len(d)):
            problems.append(Problem(source, f"{level_key}, {labels.iat[i]}", _py(d[level_key].iat[i]),
                                    f"duplicate level for point {d['point'].iat[i]!r}, quantity {d['quantity'].iat[i]!r}"))
        add("problem", np.unique(d["gid"].to_numpy()), "two rows for the same mesh level")
        good = good[~good["gid"].isin(d["gid"])]
    counts = good.groupby("gid").size().reindex(groups.index, fill_value=0)
    groups["levels"] = counts.to_numpy()
    few = counts.index[(counts.to_numpy() < 2) & (groups["problem"] == "").to_numpy()].to_numpy()
    for g in few:
        hint = "" if np.isnan(groups.at[g, "coord"]) else " (a profile's stations must be the same on every mesh)"
        problems.append(Problem(source, f"point {groups.at[g, 'point']!r}, quantity {groups.at[g, 'quantity']!r}",
                                int(counts.at[g]), "fewer than two usable mesh levels" + hint))
        add("problem", np.array([g]), "fewer than two usable mesh levels" + hint)
    if strict and problems:
        raise _problems_frame_to_error(problems, source)
    good = good[~good["gid"].isin(groups.index[groups["problem"] != ""])]
    return good, groups, problems


def _py(value: object) -> object:
    """A numpy scalar as the plain Python value, so messages read 0.1 rather than np.float64(0.1)."""
    return value.item() if isinstance(value, np.generic) else value


def _noise(good: pd.DataFrame, histories: pd.DataFrame | None, monitors: Mapping[str, str] | None,
           residuals: Sequence[str], window: int | None = None) -> pd.Series:
    """Per-row iterative-error estimate of the row's quantity from its monitored history (NaN if none)."""
    if histories is None or histories.empty or "case" not in good.columns:
        return pd.Series(np.nan, index=good.index)
    hist_names = set(histories["quantity"].astype(str)) - set(residuals)
    mapping = dict(monitors or {})
    for q in good["quantity"].unique():
        if q not in mapping and q in hist_names:
            mapping[q] = q
    if not mapping:
        return pd.Series(np.nan, index=good.index)
    chosen = list(set(mapping.values()))
    errs = monitor_error(histories, chosen) if window is None else \
        monitor_error(histories, chosen, fraction=0.0, minimum=window)
    key = pd.MultiIndex.from_arrays([good["case"].astype(str), good["quantity"].map(mapping)])
    lookup = pd.Series(errs["iterative_error"].to_numpy(float),
                       index=pd.MultiIndex.from_arrays([errs["case"].astype(str), errs["quantity"].astype(str)]))
    lookup = lookup[~lookup.index.duplicated()]
    vals = lookup.reindex(key).to_numpy(float)
    return pd.Series(np.where(good["kind"].astype(str).to_numpy() == "profile", np.nan, vals)
                     if "kind" in good.columns else vals, index=good.index)


def assess(
    results: pd.DataFrame,
    histories: pd.DataFrame | None = None,
    formal_order: float | None = None,
    *,
    residuals: Sequence[str] = (),
    monitors: Mapping[str, str] | None = None,
    dim: int | None = None,
    measure: float = 1.0,
    settings: Settings | None = None,
    study: Any = None,
    source: str = "results",
    strict: bool = False,
    quantities: Sequence[str] | None = None,
) -> pd.DataFrame:
    """Assess every (point, quantity[, station]) of a tidy results table; one row each.

    ``quantities`` limits the assessment to those names (default: the study's
    ``analysis.quantities`` when given, else every scalar and profile quantity).

    Method by number of usable levels n: n = 2 two-level GCI with the formal order and Fs = 3;
    n = 3 the three-level procedure of Celik et al. (2008) with Fs = 1.25; n >= 4 the
    least-squares procedure of Eca & Hoekstra (2014) for U, order and extrapolated value, with
    the three-level columns (e_a, GCI, R, convergence) from the three finest levels. Groups
    whose differences are all within the noise threshold (rounding, or the iterative error of
    the quantity from its history) or, on three levels, one of them: U = 3 x the spread of the
    values ("data-range"; our conservative choice). u_num = U / coverage (see COVERAGE).
    ``monitors`` maps a result quantity to its history quantity (default: same name).
    ``study`` (a loaded study file) supplies what is not given explicitly:
    ``analysis.formal_order``, ``analysis.safety_factor`` (the three-level Fs), optional
    ``analysis.coverage``, ``analysis.order_tolerance``, ``analysis.weighted`` and
    ``analysis.monitors``, ``iteration.residuals``, ``mesh.dim`` and ``mesh.measure``.
    iterative_error is the largest estimate over the group's levels (NaN without a history);
    iterative_ok applies the 1 % rule of ``iterative.iterative_negligible``.
    Output columns: ``COLUMNS`` plus the parameter columns of the results table.
    The convergence column is "unknown" for two levels (no class from one difference).
    asymptotic_ratio is Roache's GCI23 / (r21^p GCI12) on the three finest levels; with three
    levels p is observed on those same levels and the ratio is |phi1/phi2| identically (see
    richardson.asymptotic_ratio), with four or more it uses the least-squares order.
    """
    s = settings or Settings()
    if study is not None:
        s, residuals, monitors, dim, measure = _from_study(study, s, residuals, monitors, dim, measure)
        if quantities is None:
            quantities = _chosen_quantities(study, results)
    if quantities is not None:
        results = results[results["quantity"].astype(str).isin(list(quantities)).to_numpy()]
    if formal_order is not None:
        s = replace(s, formal_order=float(formal_order))
    good, groups, _ = prepare(results, dim=dim, measure=measure, source=source, strict=strict)
    good = good.assign(noise=_noise(good, histories, monitors, residuals, s.window))
    good = good.iloc[np.lexsort((good["h"].to_numpy(float), good["gid"].to_numpy()))]  # by group, finest first
    n_groups = len(groups)
    nan = lambda: np.full(n_groups, np.nan)
    out = {c: nan() for c in ("h_fine", "value_fine", "order", "extrapolated", "e_a", "e_ext", "gci_fine",
                              "gci_medium", "asymptotic_ratio", "R", "U", "iterative_error", "tiny", "sigma",
                              "data_range")}
    out["convergence"] = np.full(n_groups, "unknown", dtype="<U13")
    out["method"] = np.full(n_groups, "none", dtype="<U13")
    out["flat"] = np.zeros(n_groups, dtype=bool)
    out["good_fit"] = np.ones(n_groups, dtype=bool)
    pos = groups.index.get_indexer  # gid -> position

    sizes = good.groupby("gid", sort=True).size()
    row_n = sizes.reindex(good["gid"]).to_numpy()
    for n in np.unique(sizes.to_numpy()):
        sel = good[row_n == n]
        gids = sel["gid"].to_numpy()[::n]
        ix = pos(gids)
        h = sel["h"].to_numpy(float).reshape(-1, n)
        phi = sel["value"].to_numpy(float).reshape(-1, n)
        noise_rows = sel["noise"].to_numpy(float).reshape(-1, n)
        with np.errstate(invalid="ignore"):
            noise = np.nanmax(np.where(np.isnan(noise_rows), -np.inf, noise_rows), axis=1)
        noise = np.where(np.isfinite(noise), noise, np.nan)
        out["iterative_error"][ix] = noise
        tiny = noise_threshold(phi, np.nan_to_num(noise, nan=0.0), s.rtol)
        out["tiny"][ix] = tiny
        out["h_fine"][ix], out["value_fine"][ix] = h[:, 0], phi[:, 0]
        spread = phi.max(axis=1) - phi.min(axis=1)
        flat = spread <= tiny
        out["flat"][ix] = flat
        if n == 2:
            t = two_level(h, phi, s.formal_order, noise=tiny, fs=s.fs_two, rtol=s.rtol)
            out["method"][ix] = "two-level"
            out["extrapolated"][ix], out["e_a"][ix], out["e_ext"][ix] = t.extrapolated, t.e_a, t.e_ext
            out["gci_fine"][ix], out["U"][ix] = t.gci_fine, t.U
        else:
            t3 = three_level(h, phi, noise=tiny, fs=s.fs, rtol=s.rtol)
            for k in ("order", "extrapolated", "e_a", "e_ext", "gci_fine", "gci_medium", "asymptotic_ratio", "U"):
                out[k][ix] = getattr(t3, k)
            out["R"][ix] = t3.convergence.R
            out["convergence"][ix] = t3.convergence.kind
            out["method"][ix] = "three-level"
            if n >= 4:
                ls = least_squares_uncertainty(h, phi, weighted=s.weighted)
                out["method"][ix] = "least-squares"
                out["order"][ix], out["extrapolated"][ix], out["U"][ix] = ls.order, ls.extrapolated, ls.U
                with np.errstate(divide="ignore", invalid="ignore"):
                    out["e_ext"][ix] = np.abs((ls.extrapolated - phi[:, 0]) / ls.extrapolated)
                out["sigma"][ix], out["data_range"][ix], out["good_fit"][ix] = ls.sigma, ls.data_range, ls.good_fit
                # Roache's check on the three finest levels with the order of the fit over all levels:
                # informative here, unlike with the order observed on those same three levels.
                # Fs cancels in the ratio
                g21 = gci_relative(t3.e_a, t3.r21, ls.order, 1.0)
                g32 = gci_relative(t3.e_a32, t3.r32, ls.order, 1.0)
                out["asymptotic_ratio"][ix] = asymptotic_ratio(g21, g32, t3.r21, ls.order)
            else:
                indet = t3.convergence.kind == "indeterminate"
                out["U"][ix] = np.where(indet, 3.0 * spread, out["U"][ix])
                out["method"][ix] = np.where(indet, "data-range", "three-level")
        out["U"][ix] = np.where(flat, 3.0 * spread, out["U"][ix])
        out["method"][ix] = np.where(flat, "data-range", out["method"][ix])
        if n >= 4:  # the three-level class of the finest levels does not decide a least-squares row
            out["convergence"][ix] = np.where(out["convergence"][ix] == "indeterminate", "unknown",
                                              out["convergence"][ix])

    verdict, reason = vd.judge(
        method=out["method"], flat=out["flat"], convergence=out["convergence"], order=out["order"],
        formal_order=s.formal_order, R=out["R"], tiny=out["tiny"], sigma=out["sigma"],
        data_range=out["data_range"], good_fit=out["good_fit"], problem=groups["problem"].to_numpy(object),
        tolerance=s.order_tolerance,
    )
    ok = iterative_negligible(out["iterative_error"], out["U"], s.negligible)
    flag = ok == False
    reason = vd.append(reason, flag, [f"iterative error {e:.3g} is not below {100 * s.negligible:.0f} % of U"
                                      for e in out["iterative_error"][flag]])
    reason = vd.append(reason, _fine_not_converged(good, groups), "the finest case is not iteratively converged")
    notes = groups["note"].to_numpy(object)
    reason = vd.append(reason, notes != "", list(notes[notes != ""]))

    table = pd.DataFrame({
        "point": groups["point"].to_numpy(), "quantity": groups["quantity"].to_numpy(),
        "coord": groups["coord"].to_numpy(float), "levels": groups["levels"].to_numpy(int),
        **{k: out[k] for k in ("h_fine", "value_fine", "order", "extrapolated", "e_a", "e_ext", "gci_fine",
                               "gci_medium", "asymptotic_ratio")},
        "convergence": out["convergence"].astype(object), "R": out["R"], "method": out["method"].astype(object),
        "U": out["U"], "u_num": out["U"] / s.coverage, "iterative_error": out["iterative_error"],
        "iterative_ok": pd.array(ok, dtype="boolean"), "verdict": verdict, "reason": reason,
    })
    return _with_parameters(table, results)


def _from_study(study: Any, s: Settings, residuals: Sequence[str], monitors: Mapping[str, str] | None,
                dim: int | None, measure: float) -> tuple:
    analysis = getattr(study, "analysis", None)
    extra = dict(getattr(analysis, "model_extra", None) or {})
    changes: dict[str, Any] = {}
    if analysis is not None and analysis.formal_order is not None:
        changes["formal_order"] = float(analysis.formal_order)
    if analysis is not None and analysis.safety_factor is not None:
        changes["fs"] = float(analysis.safety_factor)
    file = str(getattr(study, "file", "study.yaml"))
    bad: list[Problem] = []
    for key, lo, hi in (("coverage", 0.0, math.inf), ("order_tolerance", 0.0, 10.0), ("negligible", 0.0, 1.0)):
        v = extra.get(key)
        if v is None:
            continue
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not lo < v <= hi:
            bad.append(Problem(file, f"analysis.{key}", v, f"must be a number above {lo:g}"
                               + (f" and at most {hi:g}" if math.isfinite(hi) else "")))
        else:
            changes[key] = float(v)
    if extra.get("weighted") is not None:
        if not isinstance(extra["weighted"], bool):
            bad.append(Problem(file, "analysis.weighted", extra["weighted"], "must be true or false"))
        else:
            changes["weighted"] = extra["weighted"]
    window = extra.get("iterative_window")
    if window is not None:
        if isinstance(window, bool) or not isinstance(window, int) or window < 2:
            bad.append(Problem(file, "analysis.iterative_window", window,
                               "must be a whole number of iterations, 2 or more"))
        else:
            changes["window"] = window
    monitors_given = extra.get("monitors")
    if monitors_given is not None and not (isinstance(monitors_given, Mapping)
                                           and all(isinstance(v, str) for v in monitors_given.values())):
        bad.append(Problem(file, "analysis.monitors", monitors_given,
                           "must map result quantities to the names of their monitored histories"))
    if bad:
        raise InputError(bad)
    iteration = getattr(study, "iteration", None)
    if not residuals and iteration is not None:
        residuals = list(iteration.residuals)
    if monitors is None and isinstance(extra.get("monitors"), Mapping):
        monitors = {str(k): str(v) for k, v in extra["monitors"].items()}
    mesh = getattr(study, "mesh", None)
    if dim is None and mesh is not None:
        dim = mesh.dim
    if measure == 1.0 and mesh is not None and mesh.measure is not None:
        measure = float(mesh.measure)
    return replace(s, **changes), residuals, monitors, dim, measure


def _chosen_quantities(study: Any, results: pd.DataFrame) -> list[str] | None:
    """The study's ``analysis.quantities`` list, checked against the quantities it declares."""
    analysis = getattr(study, "analysis", None)
    chosen = (getattr(analysis, "model_extra", None) or {}).get("quantities")
    if chosen is None:
        return None
    file = str(getattr(study, "file", "study.yaml"))
    if not isinstance(chosen, (list, tuple)) or not all(isinstance(q, str) for q in chosen):
        raise InputError(Problem(file, "analysis.quantities", chosen, "must be a list of quantity names"))
    declared = set(getattr(study, "quantities", {}) or {})
    unknown = [Problem(file, f"analysis.quantities[{i}]", q, "is not a quantity of this study")
               for i, q in enumerate(chosen) if declared and q not in declared]
    if unknown:
        raise InputError(unknown)
    return list(chosen)


def _fine_not_converged(good: pd.DataFrame, groups: pd.DataFrame) -> np.ndarray:
    if "converged" not in good.columns or good.empty:
        return np.zeros(len(groups), dtype=bool)
    finest = good.drop_duplicates("gid")  # ``good`` is sorted by group, finest level first
    conv = finest.set_index("gid")["converged"].reindex(groups.index)
    return (conv.astype("boolean") == False).fillna(False).to_numpy(bool)


def parameter_columns(results: pd.DataFrame) -> list[str]:
    """Columns of the results table that are parameters (everything not in the tidy contract)."""
    return [c for c in results.columns if c not in TIDY and c not in ("size_col", "gid", "noise")]


def _with_parameters(table: pd.DataFrame, results: pd.DataFrame) -> pd.DataFrame:
    params = parameter_columns(results)
    if not params or "point" not in results.columns:
        return table
    per_point = results.assign(point=results["point"].astype(str)).groupby("point", sort=False)[params].first()
    return table.merge(per_point, left_on="point", right_index=True, how="left")


def profile_summary(uncertainty: pd.DataFrame) -> pd.DataFrame:
    """One row per profile (point, quantity): stations, average and range of the local orders,
    share of oscillatory and diverging stations, largest and mean U along the profile.

    The average order is the mean of the local orders over stations where one was found
    (monotonic or oscillatory), the global indicator Celik et al. (2008) report beside the local
    orders (from memory); the uncertainty band along the profile is value_fine +/- U per station.
    """
    prof = uncertainty[uncertainty["coord"].notna()]
    cols = ["point", "quantity", "stations", "order_average", "order_min", "order_max", "oscillatory_share",
            "diverging_share", "U_max", "U_mean"]
    if prof.empty:
        return pd.DataFrame(columns=cols)
    g = prof.assign(osc=prof["convergence"] == "oscillatory", div=prof["convergence"] == "divergent") \
        .groupby(["point", "quantity"], sort=True)
    out = g.agg(stations=("coord", "size"), order_average=("order", "mean"), order_min=("order", "min"),
                order_max=("order", "max"), oscillatory_share=("osc", "mean"), diverging_share=("div", "mean"),
                U_max=("U", "max"), U_mean=("U", "mean")).reset_index()
    return out[cols]


def profile_band(uncertainty: pd.DataFrame) -> pd.DataFrame:
    """The uncertainty band along every profile: per station the finest value, value_fine - U and
    value_fine + U, the local order and the verdict (stations sorted by coordinate)."""
    prof = uncertainty[uncertainty["coord"].notna()].sort_values(["point", "quantity", "coord"], kind="stable")
    return pd.DataFrame({
        "point": prof["point"].to_numpy(), "quantity": prof["quantity"].to_numpy(),
        "coord": prof["coord"].to_numpy(float), "value_fine": prof["value_fine"].to_numpy(float),
        "lower": (prof["value_fine"] - prof["U"]).to_numpy(float),
        "upper": (prof["value_fine"] + prof["U"]).to_numpy(float),
        "order": prof["order"].to_numpy(float), "verdict": prof["verdict"].to_numpy(object),
    })
