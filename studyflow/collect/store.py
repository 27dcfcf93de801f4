"""Writing the study's tables into ``<study>/results/`` and reading them back.

Every file is serialised in memory first and then written with ``fsutil.atomic_write_many``, so
a reader (or a crash) sees each table whole, old or new, never half of one.
"""

from __future__ import annotations

import io
import os
from collections.abc import Iterable
from pathlib import Path

import pandas as pd

from ..errors import CollectError, Problem
from ..fsutil import atomic_write_many
from .columns import TEXT_COLUMNS  # text in every table of results/, even when it looks numeric
from .tables import ResultTables

RESULTS_DIR = "results"
# The files of each table write_tables writes, preferred first (Parquet keeps the exact dtypes).
# Tables written by other layers (uncertainty) have both formats.
_FILES = {"results": (".parquet", ".csv"), "histories": (".parquet", ".csv"), "cases": (".csv",)}
_OTHER_FILES = (".parquet", ".csv")


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
    for col in TEXT_COLUMNS:
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


def _read_csv(path: Path, text: Iterable[str]) -> pd.DataFrame:
    # Text columns must stay text even when every value looks like a number (a point id "3").
    return pd.read_csv(path, dtype={c: "str" for c in text}, keep_default_na=True)


def table_file(study_dir: str | os.PathLike, stem: str) -> Path | None:
    """The file that holds table ``stem`` of ``<study_dir>/results/`` (Parquet before CSV), or None."""
    folder = Path(study_dir) / RESULTS_DIR
    for suffix in _FILES.get(stem, _OTHER_FILES):
        path = folder / f"{stem}{suffix}"
        if path.is_file():
            return path
    return None


def read_table(study_dir: str | os.PathLike, stem: str, *, required: bool = True,
               text: Iterable[str] = ()) -> pd.DataFrame | None:
    """Read one table of ``<study_dir>/results/``: ``results``, ``histories``, ``cases`` (the
    collected tables, with their column types restored) or a table another layer wrote there
    (``uncertainty``; read as stored, CSV columns in ``TEXT_COLUMNS`` or ``text`` as text).

    A missing table is None, or with ``required`` a ``CollectError`` naming the file. A table that
    exists but cannot be read is always a ``CollectError`` naming the file: a half-written or
    foreign file must not pass for an empty one.
    """
    path = table_file(study_dir, stem)
    if path is None:
        if not required:
            return None
        expected = Path(study_dir) / RESULTS_DIR / f"{stem}{_FILES.get(stem, _OTHER_FILES)[-1]}"
        raise CollectError(Problem(str(expected), "", None, "no such table: collect the study first"))
    texts = tuple(dict.fromkeys((*TEXT_COLUMNS, *text)))
    try:
        if path.suffix == ".parquet":
            df = pd.read_parquet(path)
        else:
            df = _read_csv(path, texts)
        return _restore(df) if stem in _FILES else df
    except Exception as exc:  # pyarrow, the csv parser and the dtype casts raise many unrelated types
        raise CollectError(Problem(str(path), "", path.name, f"cannot be read as a table: {exc}")) from exc


def read_results(study_dir: str | os.PathLike) -> ResultTables:
    """Read the tables ``write_tables`` wrote (Parquet when present, else CSV); a missing or
    unreadable table is a ``CollectError`` naming its file."""
    frames = {stem: read_table(study_dir, stem) for stem in ("results", "histories", "cases")}
    return ResultTables(frames["results"], frames["histories"], frames["cases"])
