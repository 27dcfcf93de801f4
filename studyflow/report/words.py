"""The verdict of the analysis in plain sentences."""

from __future__ import annotations

import math

import pandas as pd

from ..analysis import verdict as vd
from .figures.common import fmt


def _num(value: object) -> float:
    try:
        return float(value)  # type: ignore[arg-type]
    except (TypeError, ValueError):
        return math.nan


def sentence(row: pd.Series, unit: str | None, formal_order: float | None) -> str:
    """One uncertainty row as a sentence a reviewer can read aloud."""
    u = "" if not unit or unit == "-" else f" {unit}"
    parts = [f"On {fmt(row.get('levels'), 3)} meshes the convergence is {row.get('convergence', 'unknown')}"]
    order = _num(row.get("order"))
    if math.isfinite(order):
        formal = f" (formal order {fmt(formal_order, 3)})" if formal_order else ""
        parts.append(f"the observed order is {fmt(order)}{formal}")
    ext = _num(row.get("extrapolated"))
    if math.isfinite(ext):
        parts.append(f"the extrapolated value is {fmt(ext)}{u}")
    fine, big_u = _num(row.get("value_fine")), _num(row.get("U"))
    if math.isfinite(big_u):
        pct = f" ({fmt(100 * big_u / abs(fine), 3)} % of it)" if math.isfinite(fine) and fine != 0 else ""
        parts.append(f"the finest-mesh value {fmt(fine)}{u} carries a numerical uncertainty U = {fmt(big_u)}{u}"
                     f"{pct} by {row.get('method', 'the analysis')}")
    ok = row.get("iterative_ok")
    if isinstance(ok, str):
        ok = ok.strip().lower() in ("true", "1", "yes")
    if ok is not None and not (isinstance(ok, float) and math.isnan(ok)):
        it = _num(row.get("iterative_error"))
        parts.append("the iterative error is small enough" if bool(ok) else
                     f"the iterative error{(' ' + fmt(it)) if math.isfinite(it) else ''} is too large to ignore")
    text = "; ".join(parts) + "."
    reason = row.get("reason")
    if isinstance(reason, str) and reason.strip() and reason.strip().lower() != "nan":
        reason = reason.strip().rstrip(".")
        text += f" {reason[0].upper()}{reason[1:]}."
    return text[0].upper() + text[1:]


# The analysis layer's verdict words and how the report colours them.
VERDICT_CLASS = {
    vd.ASYMPTOTIC: "good",
    vd.FLAT: "good",
    vd.TWO: "warn",
    vd.INDETERMINATE: "warn",
    vd.NOT_ASYMPTOTIC: "warn",
    vd.BELOW_FORMAL: "warn",
    vd.OSCILLATORY: "warn",
    vd.DIVERGING: "bad",
    vd.CANNOT: "bad",
}


def verdict_class(verdict: object) -> str:
    """CSS class of a verdict chip, from the words the analysis uses (anything unknown stays neutral)."""
    v = str(verdict).strip().lower()
    if v in VERDICT_CLASS:
        return VERDICT_CLASS[v]
    if any(w in v for w in ("fail", "diverg", "reject", "not ", "insufficient", "none")):
        return "bad"
    if any(w in v for w in ("caution", "warn", "oscillat", "review", "weak", "outside")):
        return "warn"
    if any(w in v for w in ("ok", "pass", "good", "converged", "accept", "asymptotic", "monotonic")):
        return "good"
    return "neutral"


def profile_sentence(row: pd.Series, unit: str | None) -> str:
    """One row of ``analysis.profile_summary`` as a sentence."""
    u = "" if not unit or unit == "-" else f" {unit}"
    text = (f"Along {fmt(row.get('stations'), 4)} stations the local observed order averages "
            f"{fmt(row.get('order_average'))} (from {fmt(row.get('order_min'), 3)} to {fmt(row.get('order_max'), 3)})")
    osc, div = _num(row.get("oscillatory_share")), _num(row.get("diverging_share"))
    if math.isfinite(osc) and osc > 0:
        text += f"; {fmt(100 * osc, 3)} % of the stations converge oscillating"
    if math.isfinite(div) and div > 0:
        text += f"; {fmt(100 * div, 3)} % diverge"
    return text + f"; U is at most {fmt(row.get('U_max'))}{u} (mean {fmt(row.get('U_mean'))}{u})."
