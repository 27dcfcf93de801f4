"""Writing the study's tables into ``<study>/results/`` and reading them back.

Every file is serialised in memory first and then written with ``fsutil.atomic_write_many``, so
a reader (or a crash) sees each table whole, old or new, never half of one.
"""

from __future__ import annotations

import io
import os
from pathlib import Path

import pandas as pd

from ..errors import CollectError, Problem
from ..fsutil import atomic_write_many
from .tables import ResultTables

RESULTS_DIR = "results"
_TEXT = ("study", "case", "point", "quantity", "kind", "unit", "status", "reason")


def _csv_bytes(df: pd.DataFrame) -> bytes:
    # pandas writes floats with their shortest round-trip repr, so CSV and Parquet hold the same numbers.
    return df.to_csv(index=False, lineterminator="\n").encode("utf-8")


def _parquet_bytes(df: pd.DataFrame) -> bytes:
    buf = io.BytesIO()
    df.to_parquet(buf, index=False, engine="pyarrow")
    return buf.getvalue()


def table_paths(study_dir: str | os.PathLike) -> dict[str, Path]:
    out = Path(study_dir) / RESULTS_DIR
    return {
        "histories.parquet": out / "histories.parquet", "histories.csv": out / "histories.csv",
        "results.parquet": out / "results.parquet", "results.csv": out / "results.csv",
        "cases.csv": out / "cases.csv",
    }


def write_tables(study_dir: str | os.PathLike, tables: ResultTables) -> dict[str, Path]:
    """Write results, histories (CSV and Parquet) and cases.csv into ``<study_dir>/results/``.

    Each file is replaced atomically, after all of them were serialised. Histories go first and cases.csv last, so a results table
    on disk never refers to histories that are not there yet. Returns the paths written.
    """
    paths = table_paths(study_dir)
    frames = {"histories": tables.histories, "results": tables.results, "cases": tables.cases}
    blobs = {}
    for name in paths:  # serialise everything first: a conversion error then touches no file
        stem, ext = name.split(".")
        blobs[name] = _parquet_bytes(frames[stem]) if ext == "parquet" else _csv_bytes(frames[stem])
    # One set: a full disk while writing any of them leaves the old set whole, not a mix.
    atomic_write_many({path: blobs[name] for name, path in paths.items()})
    return paths


def _restore(df: pd.DataFrame) -> pd.DataFrame:
    for col in _TEXT:
        if col in df.columns:
            df[col] = df[col].astype("str").where(df[col].notna(), "") if col == "reason" else df[col].astype("str")
    for col in ("level", "iterations"):
        if col in df.columns:
            df[col] = df[col].astype("Int64")
    if "converged" in df.columns:
        df["converged"] = df["converged"].astype("boolean")
    for col in ("cells", "h", "coord", "value", "wall_time"):
        if col in df.columns:
            df[col] = df[col].astype(float)
    return df


def _read_csv(path: Path) -> pd.DataFrame:
    # Text columns must stay text even when every value looks like a number (a point id "3").
    df = pd.read_csv(path, dtype={c: "str" for c in _TEXT}, keep_default_na=True)
    if "reason" in df.columns:
        df["reason"] = df["reason"].fillna("")
    return _restore(df)


def read_results(study_dir: str | os.PathLike) -> ResultTables:
    """Read the tables ``write_tables`` wrote (Parquet when present, else CSV)."""
    paths = table_paths(study_dir)
    frames = {}
    for stem in ("results", "histories", "cases"):
        pq, csv = paths.get(f"{stem}.parquet"), paths[f"{stem}.csv"]
        if pq is not None and pq.is_file():
            frames[stem] = _restore(pd.read_parquet(pq))
        elif csv.is_file():
            frames[stem] = _read_csv(csv)
        else:
            raise CollectError(Problem(str(csv), "", None, "no such table: collect the study first"))
    return ResultTables(frames["results"], frames["histories"], frames["cases"])

