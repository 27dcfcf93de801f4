"""Collection: read each finished case's quantities into a record, and the study's tidy tables.

Public functions (import them from here):

- ``check_quantities(quantities, iteration=, mesh=, parameters=, file=)`` validate the
  ``quantities:`` block against each collector's options model; raises ``CollectError``.
- ``collect_case(study, case) -> CaseRecord`` read one case, write ``.studyflow/record.json``.
- ``collect_study(study, cases=None, write=False) -> ResultTables`` every case (pending ones too).
- ``write_tables(study_dir, tables)`` write ``results/`` (CSV and Parquet, atomically).
- ``read_results(study_dir) -> ResultTables`` read them back.

Collectors are found by name in ``registry``; other packages add theirs through the entry-point
group ``studyflow.collectors``.
"""

from __future__ import annotations

from .case import CaseRecord, collect_case, judge_converged, read_quantity
from .caseinfo import CaseInfo
from .check import check_quantities
from .registry import ENTRY_POINT_GROUP, Collector
from .store import read_results, write_tables
from .study import collect_study
from .tables import ResultTables
from .values import QuantityResult, ReadFailure, Reading

__all__ = [
    "CaseInfo", "CaseRecord", "Collector", "ENTRY_POINT_GROUP", "QuantityResult", "ReadFailure", "Reading",
    "ResultTables", "check_quantities", "collect_case", "collect_study", "judge_converged", "read_quantity",
    "read_results", "write_tables",
]
