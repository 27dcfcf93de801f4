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

from ..collect import read_results
from ..collect.tables import CASE_COLUMNS, RESULT_TAIL
from ..errors import InputError, Problem, StudyflowError
from .settings import ReportSettings, load_settings

# Columns of the tidy results table that are not parameters (DEVELOPERS.md, "Tidy tables").
RESULT_FIXED = [*CASE_COLUMNS, *RESULT_TAIL]
TEXT_COLUMNS = ("study", "case", "point", "quantity", "kind", "unit", "status", "reason", "verdict", "method",
                "convergence")


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


def read_table(folder: Path, stem: str) -> tuple[pd.DataFrame | None, Path | None]:
    """Read ``<folder>/<stem>.parquet`` (preferred) or ``.csv``; (None, None) when neither exists.

    A table that exists but cannot be read is an input error naming the file: a half-written or
    foreign file must not silently become an empty report section.
    """
    def read_csv(path: Path) -> pd.DataFrame:
        # Text columns stay text even when every value looks like a number (a point id "3").
        head = pd.read_csv(path, nrows=0).columns
        return pd.read_csv(path, dtype={c: "str" for c in TEXT_COLUMNS if c in head})

    for suffix, reader in ((".parquet", pd.read_parquet), (".csv", read_csv)):
        path = folder / f"{stem}{suffix}"
        if path.is_file():
            try:
                return reader(path), path
            except Exception as exc:  # pyarrow and the csv parser raise many unrelated types
                raise InputError(Problem(str(path), "", path.name, f"cannot be read as a table: {exc}")) from exc
    return None, None


def _read_json(path: Path) -> dict[str, Any]:
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return {}
    return data if isinstance(data, dict) else {}


def _state_of(status: dict[str, Any]) -> str:
    # The step runner writes "state"; "status" is accepted for files written by other tools.
    return str(status.get("state", status.get("status", ""))).lower()


def scan_cases(root: Path, steps: list[str]) -> dict[str, CaseState]:
    """State of every rendered case from its ``.studyflow`` folder.

    A case is failed when any step's status file says so, done when every declared step has an ``ok``
    status (or, with no declared steps, when it has at least one status and none failed), else pending.
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
        status_files = sorted(meta.parent.glob("*.status.json"))
        statuses = {p.name.removesuffix(".status.json"): _read_json(p) for p in status_files}
        state.status_mtime = _newest_mtime(status_files)
        failed = [(s, d) for s, d in statuses.items() if _state_of(d) == "failed"]
        wanted = steps or list(statuses)
        ok = [s for s in wanted if _state_of(statuses.get(s, {})) == "ok"]
        running = [s for s, d in statuses.items() if _state_of(d) == "running"]
        if failed:
            state.status = "failed"
            step, detail = failed[0]
            state.reason = f"{step}: {detail.get('reason') or 'failed'}"
        elif wanted and len(ok) == len(wanted):
            state.status = "done"
        elif running:
            state.reason = f"{running[0]}: running"
        walls = [_as_float(d.get("wall_s", d.get("wall_time"))) for d in statuses.values()]
        walls = [w for w in walls if w is not None]
        state.wall_time = sum(walls) if walls else None
        starts = sorted(str(d["started"]) for d in statuses.values() if d.get("started"))
        ends = sorted(str(d["ended"]) for d in statuses.values() if d.get("ended"))
        state.hosts = tuple(sorted({str(d["host"]) for d in statuses.values() if d.get("host")}))
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
    res_dir = root / "results"
    tables: dict[str, pd.DataFrame | None] = {}
    try:
        # The collection layer's reader restores its own column types; it needs all three of its tables.
        collected = read_results(root)
    except StudyflowError:
        collected = None
    else:
        tables.update(results=collected.results, histories=collected.histories, cases=collected.cases)
    files: dict[str, Path] = {}
    for stem in ("results", "histories", "cases", "uncertainty"):
        if stem in tables:
            found = [p for p in (res_dir / f"{stem}.parquet", res_dir / f"{stem}.csv") if p.is_file()]
            if found:
                files[stem] = found[0]
            continue
        # a partly collected study: read what is there, one table at a time
        tables[stem], path = read_table(res_dir, stem)
        if path is not None:
            files[stem] = path
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
