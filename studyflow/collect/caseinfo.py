"""What collection needs to know about a study and its case folders, in one place.

This is the only module of collection that knows the layout written by the layers below (DEVELOPERS.md,
"Case folders"): ``cases/<id>/.studyflow/case.json`` from rendering, the state of a case's steps
(judged by the workflow's own ``studyflow.workflow.state.case_state`` from its ``<step>.done`` markers
and ``<step>.status.json`` files), and the attributes of ``studyflow.spec.Study`` and of the design's
case table. If one of those changes, this is the file to adjust.
"""

from __future__ import annotations

import json
import math
import os
import stat
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from functools import cached_property
from pathlib import Path
from typing import Any, Literal

from ..errors import CollectError, Problem, UnsafePathError
from ..workflow import state as wf

STATE_DIR = ".studyflow"
CaseStatus = Literal["done", "failed", "pending"]


@dataclass(frozen=True)
class StudyInfo:
    name: str
    root: Path
    file: str
    steps: tuple[str, ...]
    quantities: Mapping[str, Any]
    iteration: Any = None
    mesh: Any = None

    @property
    def cases_dir(self) -> Path:
        return self.root / "cases"

    @cached_property
    def cases_real(self) -> str:
        """The cases folder with its links resolved, once per collection rather than once per file."""
        return os.path.realpath(self.cases_dir)

    @property
    def results_dir(self) -> Path:
        return self.root / "results"


def study_info(study: Any) -> StudyInfo:
    """Read what collection needs from a loaded ``Study`` (or anything with the same attributes)."""
    if isinstance(study, StudyInfo):
        return study
    root = Path(study.root)
    try:
        file = str(study.file)
    except AttributeError:
        file = str(root / "study.yaml")
    steps = tuple(study.step_names()) if hasattr(study, "step_names") else tuple(s.name for s in study.steps)
    name = getattr(study, "name", None) or root.name
    return StudyInfo(name, root, file, steps, dict(study.quantities or {}),
                     getattr(study, "iteration", None), getattr(study, "mesh", None))


@dataclass(frozen=True)
class CaseInfo:
    """One case of the design: its id, point, mesh level, parameter values, sizes and h."""

    case: str
    point: str = ""
    level: int | None = None
    params: Mapping[str, Any] = field(default_factory=dict)
    sizes: Mapping[str, Any] = field(default_factory=dict)
    h: float | None = None
    cells: float | None = None


def _num(value: Any) -> float | None:
    if value is None or isinstance(value, bool):
        return None
    try:
        out = float(value)
    except (TypeError, ValueError):
        return None
    return out if math.isfinite(out) else None


def _cells_from_sizes(sizes: Mapping[str, Any], mesh: Any) -> float | None:
    # Sizes that are cell counts per direction multiply to the cell count; spacings do not.
    counts = getattr(mesh, "counts", None) if mesh is not None else None
    if not counts:
        return None
    values = [_num(sizes.get(k)) for k in counts]
    if any(v is None for v in values):
        return None
    return float(math.prod(values))  # type: ignore[arg-type]


def case_from_mapping(data: Mapping[str, Any], mesh: Any = None, fallback_id: str = "") -> CaseInfo:
    """A ``CaseInfo`` from case.json or a design row (tolerant of either's key names)."""
    case = str(data.get("case") or data.get("case_id") or data.get("id") or fallback_id)
    mesh_block = data.get("mesh") if isinstance(data.get("mesh"), Mapping) else {}
    sizes = data.get("sizes") or mesh_block.get("sizes") or {}
    if not sizes and mesh_block:
        sizes = {k: v for k, v in mesh_block.items() if k not in ("level", "levels", "h", "ratio", "cells", "sizes")}
    level = data.get("level", mesh_block.get("level"))
    h = _num(data.get("h", mesh_block.get("h")))
    cells = _num(data.get("cells", mesh_block.get("cells")))
    if cells is None:
        cells = _cells_from_sizes(sizes, mesh)
    params = data.get("params", data.get("parameters")) or {}
    point = str(data.get("point") or data.get("point_id") or "")
    return CaseInfo(case, point, None if level is None else int(level), dict(params), dict(sizes), h, cells)


def inside(root_real: str, relative: str, what: str = "path") -> Path:
    """``fsutil.confined`` for a root whose links are already resolved: the same refusals
    (absolute paths, ``..`` and links that leave the root), cheaper for the tens of thousands of
    files a large study's collection opens: the root is not resolved again, and a path without
    ``..`` or links below the root costs one ``lstat`` per component instead of a full realpath."""
    if os.path.isabs(relative):
        raise UnsafePathError(f"{what} {relative!r} is absolute; it must stay inside {root_real}")
    parts = [p for p in relative.split(os.sep) if p not in ("", ".")]
    target = root_real
    plain = ".." not in parts
    if plain:
        for i, part in enumerate(parts):
            target = target + os.sep + part
            try:
                mode = os.lstat(target).st_mode
            except OSError:  # missing: nothing below it can be a link
                target = os.sep.join([target, *parts[i + 1:]])
                break
            if stat.S_ISLNK(mode):
                plain = False
                break
    if not plain:
        target = os.path.realpath(os.path.join(root_real, relative))
    if target != root_real and not target.startswith(root_real.rstrip(os.sep) + os.sep):
        raise UnsafePathError(f"{what} {relative!r} leaves {root_real}")
    return Path(target)


def case_dir(info: StudyInfo, case: str) -> Path:
    """The case's folder, refused if the id (or a link) would leave ``cases/``."""
    return inside(info.cases_real, case, what="case id")


def read_case_json(info: StudyInfo, case: str) -> CaseInfo | None:
    path = case_dir(info, case) / STATE_DIR / "case.json"
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        return None
    except (ValueError, UnicodeDecodeError) as exc:
        raise CollectError(Problem(str(path), "", None, f"not valid JSON: {exc}")) from None
    return case_from_mapping(data, info.mesh, fallback_id=case)


def design_cases(info: StudyInfo, study: Any = None) -> list[CaseInfo]:
    """Every case of the study: the design's case table when ``study`` is a loaded ``Study`` (so
    cases not rendered yet are included, as pending), else the rendered case folders."""
    if study is not None and not isinstance(study, StudyInfo) and hasattr(study, "parameters"):
        from ..design import build_design  # noqa: PLC0415 - only needed with a full Study

        return [CaseInfo(c.id, c.point.id, c.level, dict(c.params), dict(c.mesh.sizes),
                         _num(c.mesh.h), _num(c.mesh.cells)) for c in build_design(study).cases]
    found = []
    if info.cases_dir.is_dir():
        for entry in sorted(info.cases_dir.iterdir()):
            if (entry / STATE_DIR / "case.json").is_file():
                c = read_case_json(info, entry.name)
                if c is not None:
                    found.append(c)
    return found


@dataclass(frozen=True)
class CaseState:
    """Where a case stands in the workflow: every step done and ok, a step failed, or neither yet."""

    status: CaseStatus
    reason: str = ""
    wall_time: float | None = None
    stamps: tuple[tuple[str, int, int], ...] = ()  # (file, size, mtime_ns) of the markers read


def _stamp(path: Path) -> tuple[str, int, int] | None:
    try:
        st = path.stat()
    except FileNotFoundError:
        return None
    return (path.name, st.st_size, st.st_mtime_ns)


def case_state(folder: Path, steps: Iterable[str]) -> CaseState:
    """Judge a case by the workflow's rule, ``studyflow.workflow.state.case_state``.

    Done only when every step has its done marker (the step runner writes it last, after checking
    the outputs), so the outputs of an interrupted or half-finished case are never read; failed when
    the first step that is not done failed (a failure behind a step being rerun no longer stands);
    else pending. The reasons are worded for the results table, and a done case carries the stamps
    of its status files and markers, which tell collection whether its record is still current.
    """
    steps = list(steps)
    judged = wf.case_state(folder, steps)
    walls = [w for w in (_num(s.wall_s) for s in judged.steps) if w is not None]
    wall = float(sum(walls)) if walls else None
    if judged.status == wf.DONE:
        state = folder / STATE_DIR
        stamps = [stamp for step in steps for name in (f"{step}.status.json", f"{step}.done")
                  if (stamp := _stamp(state / name)) is not None]
        return CaseState("done", "", wall, tuple(stamps))
    first = next((s for s in judged.steps if not s.done), None)
    if first is None:  # no steps at all: nothing says the case ran
        return CaseState("pending", "no steps", wall)
    if judged.status == wf.FAILED:
        reason = first.reason or f"state {first.state!r}"
        code = first.exit_code
        if code not in (None, 0) and "exit code" not in str(reason):
            reason = f"{reason} (exit code {code})"
        return CaseState("failed", f"step {first.step}: {reason}", wall)
    if judged.status == wf.RUNNING:
        return CaseState("pending", f"step {first.step} running", wall)
    if all(s.state == "none" and not s.done for s in judged.steps):
        return CaseState("pending", "not run yet", wall)
    return CaseState("pending", f"step {first.step} not finished", wall)
