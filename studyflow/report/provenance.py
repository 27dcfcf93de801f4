"""Where the report's numbers came from: versions, the study file's hash, host, dates and counts."""

from __future__ import annotations

import json
import platform
import sys
from collections import Counter
from datetime import UTC, datetime

import pandas as pd

from .. import __version__
from .data import StudyData

VERSION_KEYS = ("solver_version", "version")


def solver_versions(data: StudyData, limit: int = 5) -> list[str]:
    """Solver names and versions as the solvers wrote them into their JSON outputs (first few cases).

    Looks for ``{"solver": {"name", "version"}}``, ``{"solver": "name", "version": ...}`` or
    ``{"solver_version": ...}`` at the top level of any JSON file in the case folder.
    """
    found: list[str] = []
    done = [c for c in data.cases.values() if c.status == "done" and c.folder is not None][:limit]
    for case in done:
        for path in sorted(case.folder.glob("*.json")):
            try:
                doc = json.loads(path.read_text(encoding="utf-8"))
            except (OSError, ValueError):
                continue
            if not isinstance(doc, dict):
                continue
            solver = doc.get("solver")
            text = None
            if isinstance(solver, dict) and solver.get("version"):
                text = f"{solver.get('name', 'solver')} {solver['version']}"
            elif any(doc.get(k) for k in VERSION_KEYS):
                name = solver if isinstance(solver, str) else (data.settings.solver or "solver")
                text = f"{name} {next(doc[k] for k in VERSION_KEYS if doc.get(k))}"
            if text and text not in found:
                found.append(text)
    return found


def provenance(data: StudyData, case_table: pd.DataFrame, built: datetime | None = None) -> list[tuple[str, str]]:
    built = built or datetime.now(UTC)
    counts = Counter(case_table["status"].astype(str)) if len(case_table) else Counter()
    starts = sorted(c.started for c in data.cases.values() if c.started)
    ends = sorted(c.ended for c in data.cases.values() if c.ended)
    quantities = sorted(set(data.results["quantity"].astype(str))) if data.results is not None else []
    points = case_table["point"].dropna().astype(str).nunique() if len(case_table) else 0
    levels = case_table["level"].dropna().nunique() if len(case_table) else 0
    s = data.settings
    rows = [
        ("study", str(data.root)),
        ("study file", str(s.study_file) if s.study_file else "(none found)"),
        ("study-file SHA-256", s.study_hash or "-"),
        ("studyflow version", __version__),
        ("solver", ", ".join(solver_versions(data)) or (s.solver or "not recorded by the solver")),
        ("python", f"{platform.python_implementation()} {sys.version.split()[0]}"),
        ("report built on host", platform.node() or "-"),
        ("cases ran on hosts", ", ".join(sorted({h for c in data.cases.values() for h in c.hosts})) or "not recorded"),
        ("report built (UTC)", built.strftime("%Y-%m-%d %H:%M:%S")),
        ("first case started", starts[0] if starts else "-"),
        ("last case ended", ends[-1] if ends else "-"),
        ("cases", (f"{len(case_table)} total: {counts.get('done', 0)} done, {counts.get('failed', 0)} failed, "
                   f"{counts.get('pending', 0)} pending")),
        ("points x levels", f"{points} x {levels}"),
        ("quantities", ", ".join(quantities) or "-"),
    ]
    for stem, path in sorted(data.table_files.items()):
        stamp = datetime.fromtimestamp(path.stat().st_mtime, UTC).strftime("%Y-%m-%d %H:%M:%S")
        rows.append((f"{stem} table", f"{path.relative_to(data.root)} (written {stamp} UTC)"))
    return rows


def failures(case_table: pd.DataFrame) -> list[tuple[str, str]]:
    failed = case_table[case_table["status"].astype(str) == "failed"]
    return [(str(r["case"]), str(r["reason"]) or "no reason recorded") for r in failed.to_dict("records")]
