"""Collecting a whole study: every case of the design into the three tidy tables."""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from typing import Any

from ..errors import CollectError, Problem
from .case import bind_study, collect_one, settings_key
from .caseinfo import CaseInfo, case_from_mapping, design_cases, read_case_json, study_info
from .store import write_tables
from .tables import ResultTables, build_tables, parameter_names


def _select(info: Any, study: Any, cases: Iterable[str | CaseInfo | Mapping[str, Any]] | None) -> list[CaseInfo]:
    if cases is None:
        return design_cases(info, study)
    chosen: list[CaseInfo] = []
    known: dict[str, CaseInfo] | None = None
    missing: list[str] = []
    for c in cases:
        if isinstance(c, CaseInfo):
            chosen.append(c)
        elif isinstance(c, Mapping):
            chosen.append(case_from_mapping(c, info.mesh))
        else:
            if known is None:
                known = {d.case: d for d in design_cases(info, study)}
            found = known.get(str(c)) or read_case_json(info, str(c))
            if found is None:
                missing.append(str(c))
            else:
                chosen.append(found)
    if missing:
        raise CollectError([Problem(info.file, "cases", m, "no such case in this study") for m in missing])
    return chosen


def collect_study(study: Any, cases: Iterable[str | CaseInfo | Mapping[str, Any]] | None = None, *,
                  write: bool = False, write_records: bool = True, reuse: bool = True) -> ResultTables:
    """Collect every case of ``study`` (or only ``cases``: ids, ``CaseInfo`` or design rows).

    Cases whose steps all finished are read (their ``record.json`` is written, or reused when the
    outputs and settings are unchanged); failed cases keep their reason; cases not run yet appear
    as ``pending``. Returns the results, histories and cases tables; with ``write=True`` they are
    also written to ``<study>/results/``. Raises ``CollectError`` when the quantities are invalid.
    """
    info = study_info(study)
    selected = _select(info, study, cases)
    params = parameter_names(selected)
    bound = bind_study(info, tuple(params))
    settings = settings_key(info, bound)
    records = [collect_one(info, bound, c, write=write_records, reuse=reuse, settings=settings) for c in selected]
    tables = build_tables(info.name, bound, records, params)
    if write:
        write_tables(info.root, tables)
    return tables

