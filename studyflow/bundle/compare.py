"""Comparison of shipped and re-made tables, quantity by quantity, within tolerances.

Rows are matched by case and quantity; profile stations and history iterations are matched
in order of their coordinate, so a station coordinate that moved by round-off still pairs
with its partner (and is itself compared within tolerance).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from .tolerances import AuditSettings, close


@dataclass
class QuantityCheck:
    case: str
    quantity: str
    kind: str
    values: int = 0
    ok: bool = True
    max_abs_diff: float = 0.0
    max_rel_diff: float = 0.0
    rtol: float = 0.0
    atol: float = 0.0
    worst: dict[str, Any] = field(default_factory=dict)
    reason: str = ""
    compared: bool = True

    def to_json(self) -> dict[str, Any]:
        return {k: (None if isinstance(v, float) and not math.isfinite(v) else v) for k, v in self.__dict__.items()}


def _num(x: Any) -> float:
    try:
        return float(x)
    except (TypeError, ValueError):
        return math.nan


def _series_check(check: QuantityCheck, old: np.ndarray, new: np.ndarray, rtol: float, atol: float,
                  coords: tuple[np.ndarray, np.ndarray] | None = None) -> None:
    check.rtol, check.atol, check.values = rtol, atol, len(old)
    if len(old) != len(new):
        check.ok = False
        check.reason = f"{len(old)} values shipped, {len(new)} re-made"
        return
    for i, (a, b) in enumerate(zip(old, new)):
        a, b = _num(a), _num(b)
        if math.isfinite(a) and math.isfinite(b):
            d = abs(b - a)
            check.max_abs_diff = max(check.max_abs_diff, d)
            if a != 0:
                check.max_rel_diff = max(check.max_rel_diff, d / abs(a))
        if not close(b, a, rtol, atol):
            if check.ok or abs(b - a) > _num(check.worst.get("abs_diff", 0.0)):
                check.worst = {"index": i, "shipped": a, "new": b,
                               "abs_diff": abs(b - a) if math.isfinite(a) and math.isfinite(b) else None}
            check.ok = False
    if coords is not None:
        for i, (a, b) in enumerate(zip(*coords)):
            if not close(_num(b), _num(a), rtol, atol):
                check.ok = False
                check.reason = f"station {i}: coordinate {a!r} shipped, {b!r} re-made"
                break
    if not check.ok and not check.reason:
        w = check.worst
        check.reason = (f"value {w.get('index')}: shipped {w.get('shipped')!r}, re-made {w.get('new')!r} "
                        f"(allowed |diff| <= {atol:g} + {rtol:g}*|shipped|)")


def compare_results(shipped: pd.DataFrame, remade: pd.DataFrame, cases: list[str],
                    settings: AuditSettings) -> list[QuantityCheck]:
    """One check per (case, quantity) of the shipped results for ``cases``."""
    checks: list[QuantityCheck] = []
    old_all = shipped[shipped["case"].astype(str).isin(cases)]
    for (case, quantity), old in old_all.groupby(["case", "quantity"], sort=True):
        new = remade[(remade["case"].astype(str) == str(case)) & (remade["quantity"] == quantity)]
        kind = str(old["kind"].iloc[0]) if "kind" in old else "scalar"
        check = QuantityCheck(str(case), str(quantity), kind)
        rtol, atol = settings.for_quantity(str(quantity))
        check.rtol, check.atol = rtol, atol
        checks.append(check)
        if str(quantity) in settings.ignore:
            check.compared, check.reason = False, "not compared (audit.ignore)"
            continue
        if new.empty:
            check.ok, check.reason = False, "not in the re-run's results"
            continue
        if "status" in old and "status" in new:
            s_old, s_new = sorted(set(old["status"].astype(str))), sorted(set(new["status"].astype(str)))
            if s_old != s_new:
                check.ok, check.reason = False, f"status {'/'.join(s_old)} shipped, {'/'.join(s_new)} re-made"
                continue
        if "converged" in old and "converged" in new:
            c_old, c_new = _flags(old["converged"]), _flags(new["converged"])
            if c_old != c_new:
                check.ok, check.reason = False, f"converged {c_old} shipped, {c_new} re-made"
                continue
        o = old.sort_values("coord", kind="stable") if "coord" in old else old
        n = new.sort_values("coord", kind="stable") if "coord" in new else new
        coords = (o["coord"].to_numpy(), n["coord"].to_numpy()) if kind == "profile" and "coord" in o else None
        _series_check(check, o["value"].to_numpy(), n["value"].to_numpy(), rtol, atol, coords)
    return checks


def _flags(col: pd.Series) -> str:
    """The case's converged flag as text (one value per case; missing shown as 'unknown')."""
    def one(v: Any) -> str:
        if v is None or (not isinstance(v, str) and pd.isna(v)):
            return "unknown"
        if isinstance(v, str):  # a CSV read without dtypes
            return v.strip().lower() if v.strip() else "unknown"
        return str(bool(v)).lower()

    vals = sorted({one(v) for v in col})
    return "/".join(vals)


def compare_histories(shipped: pd.DataFrame, remade: pd.DataFrame, cases: list[str],
                      settings: AuditSettings) -> list[QuantityCheck]:
    """One check per (case, history quantity): every iteration's value within tolerance."""
    checks: list[QuantityCheck] = []
    old_all = shipped[shipped["case"].astype(str).isin(cases)]
    for (case, quantity), old in old_all.groupby(["case", "quantity"], sort=True):
        new = remade[(remade["case"].astype(str) == str(case)) & (remade["quantity"] == quantity)]
        check = QuantityCheck(str(case), str(quantity), "iterations")
        checks.append(check)
        if str(quantity) in settings.ignore:
            check.compared, check.reason = False, "not compared (audit.ignore)"
            continue
        rtol, atol = settings.for_quantity(str(quantity))
        if new.empty:
            check.ok, check.reason, check.rtol, check.atol = False, "no history in the re-run", rtol, atol
            continue
        o, n = old.sort_values("iteration"), new.sort_values("iteration")
        _series_check(check, o["value"].to_numpy(), n["value"].to_numpy(), rtol, atol)
    return checks


@dataclass
class TableComparison:
    rows_shipped: int
    rows_remade: int
    ok: bool
    differences: list[dict[str, Any]] = field(default_factory=list)

    def to_json(self) -> dict[str, Any]:
        return dict(self.__dict__)


def _same(a: Any, b: Any) -> bool:
    if a is None or (isinstance(a, float) and math.isnan(a)) or a is pd.NA:
        return b is None or (isinstance(b, float) and math.isnan(b)) or b is pd.NA
    return a == b or str(a) == str(b)


def _key(v: Any) -> str:
    f = _num(v)
    if not math.isnan(f) or (isinstance(v, float) and math.isnan(v)):
        return repr(round(f, 12)) if math.isfinite(f) else repr(f)
    return str(v)


def compare_tables(shipped: pd.DataFrame, remade: pd.DataFrame, keys: list[str],
                   tolerance: Callable[[dict[str, Any]], tuple[float, float]],
                   limit: int = 50) -> TableComparison:
    """Row by row, matched on ``keys``: numbers within tolerance, everything else equal."""
    diffs: list[dict[str, Any]] = []
    keys = [k for k in keys if k in shipped.columns]

    def index(df: pd.DataFrame) -> dict[tuple, dict[str, Any]]:
        return {tuple(_key(r[k]) for k in keys): r for r in df.to_dict("records")}

    old, new = index(shipped), index(remade)
    for k in sorted(set(old) - set(new)):
        diffs.append({"row": dict(zip(keys, k)), "problem": "missing from the re-computed table"})
    for k in sorted(set(new) - set(old)):
        diffs.append({"row": dict(zip(keys, k)), "problem": "only in the re-computed table"})
    for k in sorted(set(old) & set(new)):
        a, b = old[k], new[k]
        rtol, atol = tolerance(a)
        for col in shipped.columns:
            if col in keys:
                continue
            if col not in b:
                diffs.append({"row": dict(zip(keys, k)), "column": col, "problem": "column missing"})
                continue
            va, vb = a[col], b[col]
            numeric = isinstance(va, (int, float, np.number)) and not isinstance(va, bool) and \
                isinstance(vb, (int, float, np.number)) and not isinstance(vb, bool)
            same = close(float(vb), float(va), rtol, atol) if numeric else _same(va, vb)
            if not same:
                diffs.append({"row": dict(zip(keys, k)), "column": col, "shipped": _plain(va), "new": _plain(vb)})
    return TableComparison(len(shipped), len(remade), not diffs, diffs[:limit])


def _plain(v: Any) -> Any:
    if isinstance(v, np.generic):
        v = v.item()
    if isinstance(v, float) and not math.isfinite(v):
        return repr(v)
    return v
