"""Readable terminal text of an uncertainty table, with the cautions a user must see beside results."""

from __future__ import annotations

import math

import pandas as pd

from .table import profile_summary

CAUTIONS = (
    "Cautions: these figures are verification of the numerical solution (mesh and iterative error), not "
    "validation against reality; results that feed a design need review by a qualified engineer; local "
    "codes and licensed practice govern."
)


def _g(x: object, digits: int = 4) -> str:
    try:
        v = float(x)  # type: ignore[arg-type]
    except (TypeError, ValueError):
        return str(x)
    if math.isnan(v):
        return "-"
    return f"{v:.{digits}g}"


def _pct(u: object, v: object) -> str:
    try:
        u, v = float(u), float(v)  # type: ignore[arg-type]
    except (TypeError, ValueError):
        return "-"
    if math.isnan(u) or math.isnan(v) or v == 0:
        return "-"
    return f"{100 * u / abs(v):.2g}%"


def _grid(headers: list[str], rows: list[list[str]]) -> list[str]:
    widths = [max([len(h)] + [len(r[i]) for r in rows]) for i, h in enumerate(headers)]
    line = lambda cells: "  ".join(c.ljust(w) for c, w in zip(cells, widths)).rstrip()
    return [line(headers), line(["-" * w for w in widths])] + [line(r) for r in rows]


def uncertainty_text(unc: pd.DataFrame, max_rows: int = 60) -> str:
    """Scalars one per line, each profile summarised in one line, then counts and cautions."""
    out: list[str] = []
    scalars = unc[unc["coord"].isna()]
    if not scalars.empty:
        rows = [
            [str(r.point), str(r.quantity), str(r.levels), _g(r.value_fine), _g(r.order, 3), _g(r.extrapolated),
             _g(r.U, 3), _pct(r.U, r.value_fine), str(r.method), str(r.verdict)]
            for r in scalars.head(max_rows).itertuples(index=False)
        ]
        out += _grid(["point", "quantity", "levels", "fine value", "order", "extrapolated", "U", "U/value",
                      "method", "verdict"], rows)
        if len(scalars) > max_rows:
            out.append(f"... {len(scalars) - max_rows} more scalar rows in the uncertainty table")
    prof = profile_summary(unc)
    if not prof.empty:
        out.append("")
        rows = [
            [str(r.point), str(r.quantity), str(r.stations), _g(r.order_average, 3),
             f"{_g(r.order_min, 3)}..{_g(r.order_max, 3)}", f"{100 * r.oscillatory_share:.0f}%",
             f"{100 * r.diverging_share:.0f}%", _g(r.U_max, 3)]
            for r in prof.head(max_rows).itertuples(index=False)
        ]
        out += _grid(["point", "profile", "stations", "mean order", "order range", "oscillatory", "diverging",
                      "largest U"], rows)
    counts = unc["verdict"].value_counts()
    out.append("")
    out.append("verdicts: " + ", ".join(f"{n} {v}" for v, n in counts.items()))
    flagged = int((unc["iterative_ok"] == False).sum())
    if flagged:
        out.append(f"{flagged} rows: iterative error not negligible beside U (see the reason column)")
    out.append("")
    out.append(CAUTIONS)
    return "\n".join(out)


def iterative_text(summary: pd.DataFrame, max_rows: int = 30) -> str:
    """Residual drop per case and residual, worst first; residuals at round-off level the whole
    run (``roundoff``) come last, marked as such instead of with a drop."""
    if summary.empty:
        return ""
    flat = summary["roundoff"].astype(bool) if "roundoff" in summary.columns else pd.Series(False, summary.index)
    s = summary.assign(at_roundoff=flat).sort_values(["at_roundoff", "drop_orders"], kind="stable").head(max_rows)
    rows = [[str(r.case), str(r.quantity), str(r.iterations),
             "at round-off" if r.at_roundoff else _g(r.drop_orders, 3), _g(r.final, 3), _g(r.final_normalised, 3)]
            for r in s.itertuples(index=False)]
    return "\n".join(["residuals (smallest drop first):"] + _grid(
        ["case", "residual", "iterations", "drop (orders)", "final", "final / peak"], rows))
