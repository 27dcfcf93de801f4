"""A plain CSV of mesh levels from any source, turned into the tidy rows ``assess`` reads.

Columns: ``cells`` or ``h`` (the mesh size), ``value`` (or another named value column), and any
group columns (default: every other column). Each distinct combination of group values is one
group ("point"); the value column's name is the quantity.
"""

from __future__ import annotations

import os
import warnings
from collections.abc import Sequence
from pathlib import Path

import numpy as np
import pandas as pd

from ..errors import InputError, Problem


def read_level_csv(path: str | os.PathLike, *, value: str = "value", size: str | None = None,
                   groups: Sequence[str] | None = None) -> pd.DataFrame:
    """Read ``path`` into tidy rows (point, quantity, h/cells, value, row, group columns).

    ``size`` names the size column (default: ``h`` if present, else ``cells``); ``row`` is the
    line number in the file, so later errors can point at it. Text that is not a number in the
    size or value column is reported here, every such cell at once.
    """
    file = str(path)
    p = Path(path)
    if not p.is_file():
        raise InputError(Problem(file, "", file, "no such file"))
    try:
        with warnings.catch_warnings():
            # index_col=False: a first row longer than the header is an error, not silently an index
            warnings.simplefilter("error", pd.errors.ParserWarning)
            raw = pd.read_csv(p, dtype=str, keep_default_na=False, skipinitialspace=True, index_col=False)
    except pd.errors.ParserWarning:
        lines = p.read_text(encoding="utf-8", errors="replace").splitlines()
        raise InputError(Problem(file, "line 2", lines[1] if len(lines) > 1 else None,
                                 "the row has more fields than the header")) from None
    except (pd.errors.EmptyDataError, pd.errors.ParserError, UnicodeDecodeError) as exc:
        raise InputError(Problem(file, "", None, f"not a readable CSV table ({exc})")) from exc
    raw.columns = [str(c).strip() for c in raw.columns]
    if size is None:
        size = "h" if "h" in raw.columns else "cells"
    problems = [Problem(file, c, list(raw.columns), "column missing")
                for c in (size, value) if c not in raw.columns]
    if size not in ("h", "cells"):
        problems.append(Problem(file, "size", size, "the size column must be named h or cells"))
    group_cols = list(groups) if groups is not None else [c for c in raw.columns if c not in (size, value)]
    # A "quantity" column names the quantity of each row rather than a group of its own.
    quantity_col = "quantity" in raw.columns and "quantity" in group_cols
    group_cols = [c for c in group_cols if c != "quantity"]
    problems += [Problem(file, c, list(raw.columns), "group column missing") for c in group_cols if c not in raw.columns]
    if problems:
        raise InputError(problems)
    if raw.empty:
        raise InputError(Problem(file, "", 0, "the table has no rows"))
    out = pd.DataFrame(index=raw.index)
    line = np.arange(len(raw)) + 2  # header is line 1
    for col in (size, value):
        text = raw[col].str.strip()
        num = pd.to_numeric(text, errors="coerce")
        bad = num.isna() & ~text.str.lower().isin(["nan", "inf", "-inf", "+inf"])
        problems += [Problem(file, f"{col}, line {line[i]}", text.iat[i], "not a number")
                     for i in np.flatnonzero(bad.to_numpy())]
        out[col] = num.astype(float)
    if problems:
        raise InputError(problems)
    out["row"] = [f"line {n}" for n in line]
    if group_cols:
        keys = raw[group_cols].astype(str)
        point = keys[group_cols[0]].radd(f"{group_cols[0]}=")
        for c in group_cols[1:]:
            point = point + f",{c}=" + keys[c]
        out["point"] = point
        for c in group_cols:
            num = pd.to_numeric(raw[c], errors="coerce")
            out[c] = num if num.notna().all() else raw[c]
    else:
        out["point"] = "all"
    out["quantity"] = raw["quantity"].astype(str) if quantity_col else value
    out["kind"] = "scalar"
    out["status"] = "done"
    if value != "value":
        out = out.rename(columns={value: "value"})
    return out
