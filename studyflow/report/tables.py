"""The report's tables, built from the study's tidy tables and case states."""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..analysis import residual_summary as analysis_residuals
from .data import StudyData

CASE_COLUMNS = ["case", "point", "level", "status", "iterations", "residual drop [decades]",
                "final residual", "wall time [s]", "reason"]


def _first(frame: pd.DataFrame, names: tuple[str, ...]) -> pd.Series | None:
    for n in names:
        if n in frame.columns:
            return frame[n]
    return None


def residual_summary(histories: pd.DataFrame | None, residuals: list[str]) -> pd.DataFrame:
    """Per case: iterations run, the drop of the worst residual in decades, the largest final residual.

    The per-residual drop log10(r_peak / r_final) is the analysis layer's (``analysis.residual_summary``);
    the case keeps the smallest drop over its residuals (common practice: a case is as converged as its
    worst-converged equation), leaving out residuals that sat at round-off level the whole run
    (``roundoff``: their drop measures noise) unless every residual of the case did.
    """
    cols = ["case", "iterations", "residual drop [decades]", "final residual"]
    if histories is None or histories.empty:
        return pd.DataFrame(columns=cols)
    per = analysis_residuals(histories.assign(case=histories["case"].astype(str)), list(residuals) or None)
    if per.empty:
        return pd.DataFrame(columns=cols)
    per = per.replace([np.inf, -np.inf], np.nan)
    if "roundoff" in per.columns:
        flat = per["roundoff"].astype(bool)
        all_flat = flat.groupby(per["case"]).transform("all")
        per = per.assign(drop_orders=per["drop_orders"].where(~flat | all_flat))
    per = per.groupby("case")
    return pd.DataFrame({
        "case": per.size().index.astype(str),
        "iterations": per["iterations"].max().to_numpy(),
        "residual drop [decades]": per["drop_orders"].min().to_numpy(),
        "final residual": per["final"].max().to_numpy(),
    })


def case_table(data: StudyData) -> pd.DataFrame:
    """One row per case: the live state of its folder first, then the collected case table."""
    rows: dict[str, dict] = {}
    if data.cases_table is not None and "case" in data.cases_table:
        ct = data.cases_table
        wall = _first(ct, ("wall_time", "wall_time_s", "wall", "seconds"))
        for i, r in enumerate(ct.to_dict("records")):
            rows[str(r["case"])] = {
                "case": str(r["case"]), "point": r.get("point"), "level": r.get("level"),
                "status": r.get("status", "pending"), "reason": r.get("reason"),
                "wall time [s]": None if wall is None else wall.iloc[i],
            }
    elif data.results is not None:
        for r in data.results.drop_duplicates("case").to_dict("records"):
            rows[str(r["case"])] = {"case": str(r["case"]), "point": r.get("point"), "level": r.get("level"),
                                    "status": r.get("status", "pending"), "reason": r.get("reason")}
    for name, state in data.cases.items():
        row = rows.setdefault(name, {"case": name})
        row["point"] = state.point if state.point is not None else row.get("point")
        row["level"] = state.level if state.level is not None else row.get("level")
        row["status"] = state.status
        if state.reason or state.status != "failed":
            row["reason"] = state.reason or (row.get("reason") if state.status == "failed" else "")
        if state.wall_time is not None:
            row["wall time [s]"] = state.wall_time
    table = pd.DataFrame(list(rows.values()), columns=["case", "point", "level", "status", "wall time [s]", "reason"])
    summary = residual_summary(data.histories, list(data.settings.residuals))
    table = table.merge(summary, on="case", how="left")
    if data.cases_table is not None and "iterations" in data.cases_table and "case" in data.cases_table:
        # cases without a recorded history still have the iteration count the collector found
        counted = pd.to_numeric(data.cases_table.set_index(data.cases_table["case"].astype(str))["iterations"],
                                errors="coerce")
        table["iterations"] = table["iterations"].fillna(table["case"].map(counted))
    table["reason"] = table["reason"].fillna("").astype(str).replace("nan", "")
    table["level"] = pd.to_numeric(table["level"], errors="coerce").astype("Int64")
    table["iterations"] = pd.to_numeric(table["iterations"], errors="coerce").astype("Int64")
    # The collected order (the design's order of points, coarse to fine) reads better than sorting ids as text.
    return table[CASE_COLUMNS].reset_index(drop=True)


SUMMARY_COLUMNS = ["point", "quantity", "levels", "h_fine", "value_fine", "order", "extrapolated", "U",
                   "U [%]", "gci_fine", "convergence", "method", "iterative_ok", "verdict", "reason"]


def uncertainty_summary(data: StudyData) -> pd.DataFrame:
    """Scalar rows of the analysis table, with U also as a percentage of the finest-mesh value."""
    unc = data.uncertainty
    if unc is None or unc.empty:
        return pd.DataFrame(columns=SUMMARY_COLUMNS)
    scalar = unc[pd.to_numeric(unc["coord"], errors="coerce").isna()] if "coord" in unc else unc
    scalar = scalar.copy()
    with np.errstate(divide="ignore", invalid="ignore"):
        scalar["U [%]"] = 100.0 * pd.to_numeric(scalar["U"], errors="coerce") / \
            pd.to_numeric(scalar["value_fine"], errors="coerce").abs()
    params = [p for p in data.parameters if p in scalar.columns]
    cols = ["point"] + params + [c for c in SUMMARY_COLUMNS[1:] if c in scalar.columns]
    return scalar[cols].sort_values(["quantity", "point"]).reset_index(drop=True)
