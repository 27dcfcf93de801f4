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

import importlib
from typing import TYPE_CHECKING, Any

# Each name is imported from its module on first use (PEP 562): loading a study only checks its
# quantities (``check``), and should not pay for pandas and the field readers at every command.
_WHERE = {
    "CaseRecord": "case", "collect_case": "case", "judge_converged": "case", "read_quantity": "case",
    "CaseInfo": "caseinfo", "check_quantities": "check", "ENTRY_POINT_GROUP": "registry",
    "Collector": "registry", "read_results": "store", "read_table": "store", "table_file": "store",
    "write_tables": "store", "collect_study": "study",
    "ResultTables": "tables", "QuantityResult": "values", "ReadFailure": "values", "Reading": "values",
}

__all__ = sorted(_WHERE)

if TYPE_CHECKING:
    from .case import CaseRecord, collect_case, judge_converged, read_quantity
    from .caseinfo import CaseInfo
    from .check import check_quantities
    from .registry import ENTRY_POINT_GROUP, Collector
    from .store import read_results, read_table, table_file, write_tables
    from .study import collect_study
    from .tables import ResultTables
    from .values import QuantityResult, ReadFailure, Reading


def __getattr__(name: str) -> Any:
    module = _WHERE.get(name)
    if module is None:
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
    value = getattr(importlib.import_module(f"{__name__}.{module}"), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(_WHERE))
