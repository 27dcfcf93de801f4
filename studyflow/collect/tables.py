"""Study-level tables built from case records: tidy results, histories and one row per case.

Columns follow DEVELOPERS.md ("Tidy tables"). Built column-wise with numpy so 10,000 cases take
well under a second once their records are read.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from .case import CaseRecord
from .check import Bound

from .columns import CASE_COLUMNS, CASES_TAIL, HISTORY_COLUMNS, RESULT_TAIL  # noqa: F401  (re-exported)


@dataclass(frozen=True)
class ResultTables:
    """The three tables of a collected study (pandas DataFrames)."""

    results: pd.DataFrame
    histories: pd.DataFrame
    cases: pd.DataFrame

    @property
    def parameters(self) -> list[str]:
        fixed = set(CASE_COLUMNS) | set(RESULT_TAIL)
        return [c for c in self.results.columns if c not in fixed]


def expected_kind(bound: Bound) -> str:
    """The kind a quantity will have once read, for rows of cases not read (pending, failed)."""
    if bound.spec.series:
        return "history"
    opts = bound.options
    if getattr(opts, "match", None) == "all":
        return "history"
    if getattr(opts, "coord_key", None) is not None or getattr(opts, "coord_column", None) is not None:
        return "profile"
    if getattr(opts, "operation", None) == "line":
        return "profile"
    return "scalar"


def parameter_names(records: Sequence[Any]) -> list[str]:
    """Parameter names of ``records`` (anything with ``.params``) in order of first appearance."""
    seen: dict[str, None] = {}
    for r in records:
        for k in r.params:
            seen.setdefault(k, None)
    return list(seen)


def _param_column(values: list[Any]) -> pd.Series | np.ndarray:
    present = [v for v in values if v is not None and not (isinstance(v, float) and math.isnan(v))]
    if all(isinstance(v, bool) for v in present) and present:
        return pd.array(values, dtype="boolean")
    if all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in present):
        return np.array([np.nan if v is None else float(v) for v in values], dtype=float)
    # Mixed kinds (a number in one point, a word in another) are kept as text so Parquet can store them.
    return pd.array([None if v is None else str(v) for v in values], dtype="str")


def _case_frame(study: str, records: Sequence[CaseRecord], params: list[str]) -> pd.DataFrame:
    data: dict[str, Any] = {
        "study": pd.array([study] * len(records), dtype="str"),
        "case": pd.array([r.case for r in records], dtype="str"),
        "point": pd.array([r.point for r in records], dtype="str"),
        "level": pd.array([r.level for r in records], dtype="Int64"),
    }
    for p in params:
        data[p] = _param_column([r.params.get(p) for r in records])
    data["cells"] = np.array([np.nan if r.cells is None else r.cells for r in records], dtype=float)
    data["h"] = np.array([np.nan if r.h is None else r.h for r in records], dtype=float)
    return pd.DataFrame(data)


def build_tables(study: str, bound: Mapping[str, Bound], records: Sequence[CaseRecord],
                 params: list[str] | None = None) -> ResultTables:
    """The results, histories and cases tables of ``records`` (one record per case)."""
    params = parameter_names(records) if params is None else params
    base = _case_frame(study, records, params)
    names = list(bound)
    kinds = {n: expected_kind(b) for n, b in bound.items()}
    units = {n: b.spec.unit for n, b in bound.items()}

    rec_idx: list[int] = []
    counts: list[int] = []
    q_col: list[str] = []
    kind_col: list[str] = []
    unit_col: list[str] = []
    status_col: list[str] = []
    reason_col: list[str] = []
    values: list[np.ndarray] = []
    coords: list[np.ndarray] = []
    h_rec: list[int] = []
    h_q: list[str] = []
    h_it: list[np.ndarray] = []
    h_val: list[np.ndarray] = []
    nan1 = np.array([np.nan])

    for i, r in enumerate(records):
        for n in names:
            q = r.quantities.get(n)
            reading = q.reading if q is not None and q.status == "ok" else None
            if reading is None:
                block_v, block_c, kind = nan1, nan1, kinds[n]
            elif reading.kind == "profile":
                block_v, block_c, kind = reading.values, reading.coord, "profile"
            else:
                block_v, block_c, kind = reading.values[-1:], nan1, reading.kind
                if reading.kind == "history":
                    h_rec.append(i)
                    h_q.append(n)
                    h_it.append(reading.coord)
                    h_val.append(reading.values)
            rec_idx.append(i)
            counts.append(block_v.size)
            q_col.append(n)
            kind_col.append(kind)
            unit_col.append(q.unit if q is not None else units[n])
            status_col.append(r.status)
            own = q.reason if q is not None and q.status != "ok" else ""
            if r.status == "failed" and (not own or own == "not read: the case failed"):
                own = r.reason
            elif r.status == "pending":
                own = r.reason
            reason_col.append(own)
            values.append(block_v)
            coords.append(block_c)

    counts_arr = np.asarray(counts, dtype=np.int64)
    take = np.repeat(np.asarray(rec_idx, dtype=np.int64), counts_arr)
    results = base.take(take).reset_index(drop=True)

    def per_row(items: list[str]) -> pd.api.extensions.ExtensionArray:
        return pd.array(np.repeat(np.asarray(items, dtype=object), counts_arr), dtype="str")

    results["quantity"] = per_row(q_col)
    results["kind"] = per_row(kind_col)
    results["coord"] = np.concatenate(coords) if coords else np.array([], dtype=float)
    results["value"] = np.concatenate(values) if values else np.array([], dtype=float)
    results["unit"] = per_row(unit_col)
    results["status"] = per_row(status_col)
    conv = pd.array([r.converged for r in records], dtype="boolean")
    results["converged"] = conv.take(take) if len(take) else pd.array([], dtype="boolean")
    results["reason"] = per_row(reason_col)
    results = results[list(CASE_COLUMNS) + params + list(RESULT_TAIL)]

    h_counts = np.asarray([a.size for a in h_val], dtype=np.int64)
    h_take = np.repeat(np.asarray(h_rec, dtype=np.int64), h_counts)
    histories = base[list(CASE_COLUMNS)].take(h_take).reset_index(drop=True)
    histories["quantity"] = pd.array(np.repeat(np.asarray(h_q, dtype=object), h_counts), dtype="str")
    its = np.concatenate(h_it) if h_it else np.array([], dtype=float)
    if np.all(its == np.round(its)) and np.all(np.abs(its) < 2**53):
        its = its.astype(np.int64)  # iteration numbers are counts whenever the files give whole numbers
    histories["iteration"] = its
    histories["value"] = np.concatenate(h_val) if h_val else np.array([], dtype=float)
    histories = histories[list(HISTORY_COLUMNS)]

    cases = base.copy()
    cases["status"] = pd.array([r.status for r in records], dtype="str")
    cases["reason"] = pd.array([r.reason for r in records], dtype="str")
    cases["wall_time"] = np.array([np.nan if r.wall_time is None else r.wall_time for r in records], dtype=float)
    cases["iterations"] = pd.array([r.iterations for r in records], dtype="Int64")
    cases["converged"] = conv
    cases = cases[list(CASE_COLUMNS) + params + list(CASES_TAIL)]
    return ResultTables(results, histories, cases)
