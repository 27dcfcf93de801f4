"""Assess a collected study: read its tables, assess, write ``results/uncertainty.{csv,parquet}``."""

from __future__ import annotations

import io
import os
from dataclasses import dataclass
from pathlib import Path

import pandas as pd

from ..collect import read_results
from ..fsutil import atomic_write_many
from ..spec import Study, load_study
from .iterative import residual_summary
from .table import assess

RESULTS_DIR = "results"


@dataclass(frozen=True)
class StudyAssessment:
    """The uncertainty table, the residual summary per case and where the table was written."""

    uncertainty: pd.DataFrame
    residuals: pd.DataFrame
    written: tuple[Path, ...]


def study_dir_of(path: str | os.PathLike) -> Path:
    p = Path(path)
    return p.parent if p.is_file() else p


def write_uncertainty(study_dir: str | os.PathLike, table: pd.DataFrame) -> tuple[Path, Path]:
    """Write the table as CSV and Parquet, each atomically (a reader sees the old or the new file)."""
    out = Path(study_dir) / RESULTS_DIR
    csv = table.to_csv(index=False, float_format="%.17g", lineterminator="\n").encode("utf-8")
    buf = io.BytesIO()
    table.to_parquet(buf, index=False, engine="pyarrow")
    paths = (out / "uncertainty.csv", out / "uncertainty.parquet")
    # Serialise both first, so a failure in either writes neither; replace them as one set.
    atomic_write_many({paths[0]: csv, paths[1]: buf.getvalue()})
    return paths


def assess_study(study: Study | str | os.PathLike, *, formal_order: float | None = None,
                 write: bool = True) -> StudyAssessment:
    """Assess a study (loaded, or its folder or study file) from its collected tables; with
    ``write`` the table goes to ``results/uncertainty.csv`` and ``.parquet``."""
    if not isinstance(study, Study):
        study = load_study(study)
    folder = study_dir_of(study.file)
    tables = read_results(folder)
    table = assess(tables.results, tables.histories, formal_order, study=study,
                   source=str(folder / RESULTS_DIR / "results"))
    residuals = list(study.iteration.residuals) if study.iteration is not None else []
    summary = residual_summary(tables.histories, residuals)
    written = write_uncertainty(folder, table) if write else ()
    return StudyAssessment(table, summary, tuple(written))
