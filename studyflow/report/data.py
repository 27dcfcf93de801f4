"""Everything the report reads from a study folder, gathered once into one ``StudyData``.

The report never computes study results: it reads the tidy tables the collection and analysis layers
wrote (``results/``) and the state files of the case folders, so it can be rebuilt at any time, also
while cases are still running.
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import pandas as pd

from ..collect.store import read_table, table_file
from ..collect.columns import CASE_COLUMNS, RESULT_TAIL
from ..workflow import state as wf
from .settings import ReportSettings, load_settings

# Columns of the tidy results table that are not parameters (DEVELOPERS.md, "Tidy tables").
RESULT_FIXED = [*CASE_COLUMNS, *RESULT_TAIL]
# Text columns of the analysis table beyond those every results table has (collect.store.TEXT_COLUMNS).
UNCERTAINTY_TEXT = ("verdict", "method", "convergence")
TABLES = ("results", "histories", "cases", "uncertainty")


@dataclass
class CaseState:
    """What the case folder says about one case, independent of any collected table."""

    case: str
    point: str | None = None
    level: int | None = None
    params: dict[str, Any] = field(default_factory=dict)
    h: float | None = None
    status: str = "pending"  # done | failed | pending
    reason: str = ""
    wall_time: float | None = None
    started: str | None = None
    ended: str | None = None
    hosts: tuple[str, ...] = ()
    folder: Path | None = None
    status_mtime: float | None = None  # newest step status file, stat'ed once in the scan


@dataclass
class StudyData:
    root: Path
    settings: ReportSettings
    results: pd.DataFrame | None
    histories: pd.DataFrame | None
    cases_table: pd.DataFrame | None
    uncertainty: pd.DataFrame | None
    cases: dict[str, CaseState]
    table_files: dict[str, Path]

    @property
    def parameters(self) -> list[str]:
        """Parameter columns, in the order the results table has them."""
        if self.results is not None:
            return [c for c in self.results.columns if c not in RESULT_FIXED]
        names: list[str] = []
        for c in self.cases.values():
            names += [k for k in c.params if k not in names]
        return names


def _read_json(path: Path) -> dict[str, Any]:
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return {}
    return data if isinstance(data, dict) else {}


def _rendered_steps(state_dir: Path) -> list[str]:
    """The case's steps in order, from the ``<step>.step.json`` files rendering wrote."""
    found = []
    for path in state_dir.glob("*.step.json"):
        doc = _read_json(path)
        index = _as_int(doc.get("index"))
        found.append((index if index is not None else len(found), str(doc.get("step") or path.name[:-10])))
    return [name for _, name in sorted(found)]


def _folder_state(st: wf.CaseState) -> tuple[str, str, float | None]:
    """(status, reason, wall time) of a case by the workflow's rule (``workflow.state.case_state``):
    done only when every step has its done marker, failed or running from the first step that is
    not done. The report knows three states; a running case is pending with the reason saying so."""
    walls = [w for w in (_as_float(s.wall_s) for s in st.steps) if w is not None]
    wall = sum(walls) if walls else None  # nothing recorded is no wall time, not zero seconds
    if st.status == wf.DONE:
        return "done", "", wall
    first = next((s for s in st.steps if not s.done), None)
    if st.status == wf.FAILED:
        # the workflow's reason is "<step>: <reason>"; a failure recorded without a reason says "failed"
        return "failed", st.reason if first is None or first.reason else f"{first.step}: failed", wall
    if st.status == wf.RUNNING:
        return "pending", st.reason, wall
    if first is not None and first.state == "ok":
        # The runner writes the ok status just before the done marker: a step stopped between the
        # two has outputs that were never marked as checked, so the next run repeats it.
        return "pending", f"{first.step}: ended without its done marker; the next run repeats it", wall
    return "pending", "", wall


def scan_cases(root: Path, steps: list[str]) -> dict[str, CaseState]:
    """State of every rendered case from its ``.studyflow`` folder.

    Status, reason and wall time follow the workflow's own rule (``_folder_state``), so the report
    calls a case done exactly when the workflow would not run it again and collection reads it.
    Without declared steps (no study file) the case's rendered steps are used; a case with none
    is pending. Start and end times, hosts and the newest status file come from the status files.
    """
    out: dict[str, CaseState] = {}
    cases_dir = root / "cases"
    if not cases_dir.is_dir():
        return out
    for meta in sorted(cases_dir.glob("*/.studyflow/case.json")):
        folder = meta.parent.parent
        info = _read_json(meta)
        mesh = info.get("mesh") if isinstance(info.get("mesh"), dict) else {}
        state = CaseState(
            case=str(info.get("case", folder.name)),
            point=info.get("point"),
            level=_as_int(info.get("level", mesh.get("level"))),
            params=dict(info.get("params") or {}),
            h=_as_float(info.get("h", mesh.get("h"))),
            folder=folder,
        )
        judged = wf.case_state(folder, steps or _rendered_steps(meta.parent))
        state.status, state.reason, state.wall_time = _folder_state(judged)
        state.status_mtime = _newest_mtime(sorted(meta.parent.glob("*.status.json")))
        # times and hosts from the status files the judgement above read (each file read once)
        starts = sorted(str(s.started) for s in judged.steps if s.started)
        ends = sorted(str(s.ended) for s in judged.steps if s.ended)
        state.hosts = tuple(sorted({str(s.host) for s in judged.steps if s.host}))
        state.started = starts[0] if starts else None
        state.ended = ends[-1] if ends else None
        out[state.case] = state
    return out


def _newest_mtime(paths: list[Path]) -> float | None:
    try:
        return max(p.stat().st_mtime for p in paths) if paths else None
    except OSError:
        return None


def _as_int(value: Any) -> int | None:
    try:
        return int(value)
    except (TypeError, ValueError):
        return None


def _as_float(value: Any) -> float | None:
    try:
        return float(value)
    except (TypeError, ValueError):
        return None


def load(root: str | Path) -> StudyData:
    """Gather the study's settings, tables and case states. Missing tables are ``None``, not errors."""
    root = Path(root).resolve()
    settings = load_settings(root)
    # collection's own reader: column types restored, an unreadable table an error naming its file
    tables = {stem: read_table(root, stem, required=False, text=UNCERTAINTY_TEXT if stem == "uncertainty" else ())
              for stem in TABLES}
    files = {stem: path for stem in TABLES if (path := table_file(root, stem)) is not None}
    return StudyData(
        root=root,
        settings=settings,
        results=_clean(tables["results"]),
        histories=tables["histories"],
        cases_table=tables["cases"],
        uncertainty=tables["uncertainty"],
        cases=_with_refusals(scan_cases(root, settings.steps), tables["cases"]),
        table_files=files,
    )


def _with_refusals(cases: dict[str, CaseState], table: pd.DataFrame | None) -> dict[str, CaseState]:
    """Cases whose steps all ended well but whose outputs the collection refused (NaN, missing key)
    are failed, with the collection's reason, as long as that collection is not older than the
    case's last step: a case rerun since then keeps its folder state until it is collected again."""
    if table is None or not {"case", "status"} <= set(table.columns):
        return cases
    refused = table[table["status"].astype(str) == "failed"]
    reasons = dict(zip(refused["case"].astype(str),
                       refused["reason"].astype(str) if "reason" in refused else [""] * len(refused)))
    for case_id, reason in reasons.items():
        state = cases.get(case_id)
        if state is None or state.status != "done":
            continue
        if state.status_mtime is None:
            continue
        try:
            current = (state.folder / ".studyflow" / "record.json").stat().st_mtime >= state.status_mtime
        except OSError:
            continue
        if current:
            state.status = "failed"
            state.reason = f"collection: {reason}" if reason and reason != "nan" else "collection refused an output"
    return cases


def _clean(results: pd.DataFrame | None) -> pd.DataFrame | None:
    if results is None:
        return None
    results = results.copy()
    if "kind" not in results:
        results["kind"] = "scalar"
    if "status" not in results:
        results["status"] = "done"
    return results
