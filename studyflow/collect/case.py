"""Collecting one case: read every quantity of a finished case into its record.

The record (``cases/<id>/.studyflow/record.json``, written atomically) keeps each quantity's
status: a missing file, a missing key, an unparsable or a non-finite value marks that quantity and
the case failed, with a reason naming the file, the key and the value. Only a case whose steps all
completed is read; the others are recorded as pending (not written) or failed by the workflow.
"""

from __future__ import annotations

import hashlib
import json
import os
import stat
from collections.abc import Mapping
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

import numpy as np

from ..design import h_from_cells, mesh_dim
from ..errors import UnsafePathError
from .caseinfo import (
    STATE_DIR,
    CaseInfo,
    StudyInfo,
    case_dir,
    case_state,
    design_cases,
    inside,
    read_case_json,
    study_info,
)
from .check import Bound, check_quantities
from .values import QuantityResult, ReadFailure, Reading

RECORD_FILE = "record.json"
RECORD_FORMAT = 1
_MAX_REASONS = 3


@dataclass(frozen=True)
class CaseRecord:
    """Everything collected from one case. ``status`` is ``done``, ``failed`` or ``pending``;
    ``converged`` is None when the study gives no way to judge it (or it could not be judged)."""

    study: str
    case: str
    point: str
    level: int | None
    params: Mapping[str, Any]
    cells: float | None
    h: float | None
    status: str
    reason: str = ""
    wall_time: float | None = None
    iterations: int | None = None
    converged: bool | None = None
    quantities: Mapping[str, QuantityResult] = field(default_factory=dict)
    fingerprint: str = ""

    def to_dict(self) -> dict[str, Any]:
        qs = {}
        for name, q in self.quantities.items():
            item: dict[str, Any] = {"status": q.status, "unit": q.unit, "reason": q.reason, "files": list(q.files)}
            if q.reading is not None:
                r = q.reading
                item.update(kind=r.kind, where=r.where, values=r.values.tolist(),
                            coord=None if r.coord is None else r.coord.tolist())
            qs[name] = item
        return {"format": RECORD_FORMAT, "study": self.study, "case": self.case, "point": self.point,
                "level": self.level, "params": dict(self.params), "cells": self.cells, "h": self.h,
                "status": self.status, "reason": self.reason, "wall_time": self.wall_time,
                "iterations": self.iterations, "converged": self.converged, "fingerprint": self.fingerprint,
                "quantities": qs}

    @staticmethod
    def from_dict(data: Mapping[str, Any]) -> "CaseRecord":
        qs = {}
        for name, item in data.get("quantities", {}).items():
            reading = None
            if "kind" in item:
                coord = item.get("coord")
                reading = Reading(item["kind"], np.asarray(item["values"], dtype=float),
                                  None if coord is None else np.asarray(coord, dtype=float), item.get("where", ""))
            qs[name] = QuantityResult(name, item["status"], item.get("unit", "-"), reading, item.get("reason", ""),
                                      tuple(item.get("files", ())))
        return CaseRecord(data["study"], data["case"], data.get("point", ""), data.get("level"),
                          data.get("params", {}), data.get("cells"), data.get("h"), data["status"],
                          data.get("reason", ""), data.get("wall_time"), data.get("iterations"),
                          data.get("converged"), qs, data.get("fingerprint", ""))


def _non_finite(reading: Reading) -> str | None:
    for label, arr in (("value", reading.values), ("coordinate", reading.coord)):
        if arr is None:
            continue
        bad = np.flatnonzero(~np.isfinite(arr))
        if bad.size:
            i = int(bad[0])
            at = "" if reading.kind == "scalar" else (
                f" at iteration {i + 1}" if reading.kind == "history" else f" at station {i}")
            more = f" ({bad.size} of {arr.size})" if bad.size > 1 else ""
            return f"non-finite {label}{at}{more} (got {float(arr[i])!r})"
    return None


def _resolve(folder: Path, bound: Bound) -> tuple[Path | None, str]:
    """The quantity's file, confined to the case folder, or None with the reason it is refused.
    ``folder`` has its links resolved already (``caseinfo.case_dir``)."""
    file = bound.spec.file
    try:
        path = inside(str(folder), file, what=f"quantities.{bound.name}.file")
    except UnsafePathError as exc:
        return None, f"{file}: refused: {exc}"
    return path, ""


def read_quantity(folder: Path, bound: Bound, path: Path | None = None) -> QuantityResult:
    """Read one quantity from a case folder; never raises for a bad output, returns it failed."""
    spec = bound.spec
    file = spec.file

    def failed(reason: str) -> QuantityResult:
        return QuantityResult(bound.name, "failed", spec.unit, None, reason, (file,))

    if path is None:
        path, why = _resolve(Path(os.path.realpath(folder)), bound)
        if path is None:
            return failed(why)
    try:
        mode = path.stat().st_mode
    except FileNotFoundError:
        return failed(f"{file}: missing file")
    if not stat.S_ISREG(mode):
        return failed(f"{file}: not a regular file")
    try:
        reading = bound.collector.read(path, bound.options, folder)
    except ReadFailure as exc:
        return failed(exc.reason(file))
    except (OSError, ValueError, KeyError, IndexError, TypeError, RuntimeError) as exc:
        # A third-party parser (meshio, a plugin) failing on one case must not stop the others.
        return failed(f"{file}: cannot be read: {type(exc).__name__}: {exc}")
    if not isinstance(reading, Reading):
        return failed(f"{file}: collector {spec.source!r} returned {type(reading).__name__}, not a Reading")
    if reading.values.size == 0:
        return failed(f"{file}: {reading.where + ': ' if reading.where else ''}no values")
    if reading.coord is not None and reading.coord.size != reading.values.size:
        return failed(f"{file}: {reading.coord.size} coordinates for {reading.values.size} values")
    bad = _non_finite(reading)
    if bad is not None:
        return failed(f"{file}: {reading.where + ': ' if reading.where else ''}{bad}")
    return QuantityResult(bound.name, "ok", spec.unit, reading, "", (file,))


def judge_converged(iteration: Any, results: Mapping[str, QuantityResult]) -> bool | None:
    """The case's iterative convergence per the ``iteration:`` block.

    The ``flag`` quantity wins when it was read (non-zero is converged); otherwise every residual's
    final value must be at or below its tolerance (common practice: judge the last iterate's
    residual norm). None when there is no block, or a residual could not be read.
    """
    if iteration is None:
        return None
    flag = getattr(iteration, "flag", None)
    if flag:
        q = results.get(flag)
        if q is not None and q.status == "ok" and q.reading is not None:
            return bool(q.reading.final != 0.0)
    residuals = list(getattr(iteration, "residuals", None) or [])
    if not residuals:
        return None
    tol_for = getattr(iteration, "tolerance_for", None)
    ok = True
    for name in residuals:
        q = results.get(name)
        tol = tol_for(name) if callable(tol_for) else getattr(iteration, "tolerance", None)
        if q is None or q.status != "ok" or q.reading is None or tol is None:
            return None
        ok = ok and q.reading.final <= float(tol)
    return ok


def _iterations(iteration: Any, results: Mapping[str, QuantityResult]) -> int | None:
    names = list(getattr(iteration, "residuals", None) or []) if iteration is not None else []
    pool = [results[n] for n in names if n in results] or list(results.values())
    counts = [q.reading.coord[-1] for q in pool
              if q.status == "ok" and q.reading is not None and q.reading.kind == "history" and q.reading.coord.size]
    return int(max(counts)) if counts else None


def settings_key(info: StudyInfo, bound: Mapping[str, Bound]) -> str:
    """A digest of everything in the study file that changes what a case's record holds."""
    mesh = info.mesh
    payload = {
        "format": RECORD_FORMAT,
        "quantities": {n: [b.spec.model_dump(by_alias=True), b.options.model_dump(mode="json")] for n, b in bound.items()},
        "iteration": None if info.iteration is None else (
            info.iteration.model_dump(mode="json") if hasattr(info.iteration, "model_dump") else repr(info.iteration)),
        "cells_from": [getattr(mesh, "cells_from", None), getattr(mesh, "measure", None), mesh_dim(mesh)],
    }
    return hashlib.sha256(json.dumps(payload, sort_keys=True, default=str).encode()).hexdigest()


def _fingerprint(settings: str, stamps: tuple, files: list) -> str:
    payload = [settings, list(stamps), files]
    return hashlib.sha256(json.dumps(payload).encode()).hexdigest()[:32]


def _load_record(path: Path) -> CaseRecord | None:
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
        if data.get("format") != RECORD_FORMAT:
            return None
        return CaseRecord.from_dict(data)
    except (FileNotFoundError, ValueError, KeyError, TypeError):
        return None


def collect_one(info: StudyInfo, bound: Mapping[str, Bound], case: CaseInfo, *, write: bool = True,
                reuse: bool = True, settings: str | None = None) -> CaseRecord:
    """Collect one case (the engine of ``collect_case`` and ``collect_study``); ``settings`` is
    ``settings_key(info, bound)``, computed once by the caller of many cases."""
    base = CaseRecord(info.name, case.case, case.point, case.level, dict(case.params), case.cells, case.h, "pending")
    try:
        folder = case_dir(info, case.case)
    except UnsafePathError as exc:  # e.g. cases/<id> is a link to elsewhere: that case only is refused
        return replace(base, status="failed", reason=f"refused: {exc}")
    if not folder.is_dir():
        return replace(base, reason="not rendered yet")
    state = case_state(folder, info.steps)
    if state.status == "pending":
        return replace(base, reason=state.reason, wall_time=state.wall_time)
    record_path = folder / STATE_DIR / RECORD_FILE

    if state.status == "failed":
        results = {n: QuantityResult(n, "failed", b.spec.unit, None, "not read: the case failed", (b.spec.file,))
                   for n, b in bound.items()}
        record = replace(base, status="failed", reason=state.reason, wall_time=state.wall_time, quantities=results)
        if write:
            _write(record_path, record)
        return record

    paths: dict[str, tuple[Path | None, str]] = {n: _resolve(folder, b) for n, b in bound.items()}
    files = []
    for n, (p, _) in sorted(paths.items()):
        try:
            st = p.stat() if p is not None else None
        except OSError:
            st = None
        files.append([n, None if st is None else [st.st_size, st.st_mtime_ns]])
    fp = _fingerprint(settings or settings_key(info, bound), state.stamps, files)
    if reuse:
        old = _load_record(record_path)
        if old is not None and old.fingerprint == fp and old.case == case.case:
            # The outputs and the collection settings are unchanged; the case's design facts may not be.
            return replace(old, study=info.name, point=case.point, level=case.level, params=dict(case.params),
                           wall_time=state.wall_time, cells=old.cells if _cells_quantity(info) else case.cells,
                           h=old.h if _cells_quantity(info) else case.h)

    results: dict[str, QuantityResult] = {}
    for n, b in bound.items():
        p, why = paths[n]
        results[n] = read_quantity(folder, b, p) if p is not None else QuantityResult(
            n, "failed", b.spec.unit, None, why, (b.spec.file,))

    cells, h = case.cells, case.h
    cq = _cells_quantity(info)
    if cq is not None:
        q = results.get(cq)
        if q is not None and q.status == "ok" and q.reading is not None:
            cells = q.reading.final
            try:
                h = h_from_cells(cells, float(info.mesh.measure), mesh_dim(info.mesh) or 1)
            except ValueError:
                h = None
            if h is None:
                results[cq] = replace(q, status="failed", reason=f"{q.files[0] if q.files else ''}: "
                                      f"{q.reading.where}: a cell count must be positive (got {cells!r})")
        else:
            cells, h = None, None

    reasons = [f"{n}: {q.reason}" for n, q in results.items() if q.status != "ok"]
    status = "failed" if reasons else "done"
    reason = "; ".join(reasons[:_MAX_REASONS]) + (f"; and {len(reasons) - _MAX_REASONS} more" if len(reasons) > _MAX_REASONS else "")
    record = replace(base, cells=cells, h=h, status=status, reason=reason, wall_time=state.wall_time,
                     iterations=_iterations(info.iteration, results),
                     converged=judge_converged(info.iteration, results), quantities=results, fingerprint=fp)
    if write:
        _write(record_path, record)
    return record


def _cells_quantity(info: StudyInfo) -> str | None:
    return getattr(info.mesh, "cells_from", None) if info.mesh is not None else None


def _write(path: Path, record: CaseRecord) -> None:
    data = (json.dumps(record.to_dict(), sort_keys=True, default=str) + "\n").encode("utf-8")
    try:
        if path.stat().st_size == len(data) and path.read_bytes() == data:
            return
    except FileNotFoundError:
        pass
    write_atomic_unsynced(path, data)


def write_atomic_unsynced(path: Path, data: bytes) -> None:
    """Temporary file plus rename, like ``fsutil.atomic_write_bytes`` but without fsync.

    A record is derived data: readers see the old record or the new one (the rename is atomic);
    after a power cut an empty or unreadable record is simply treated as absent and the case's
    outputs are read again. Skipping the fsync makes the first collection of 10,000 cases several
    times faster on a busy disk.
    """
    tmp = path.with_name(f".{path.name}.{os.getpid()}.tmp")
    try:
        tmp.write_bytes(data)
        os.replace(tmp, path)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise


def bind_study(info: StudyInfo, parameters: tuple[str, ...] = ()) -> dict[str, Bound]:
    """Validate the study's quantities for collection (raises ``CollectError`` with every problem)."""
    return check_quantities(info.quantities, iteration=info.iteration, mesh=info.mesh,
                            parameters=parameters, file=info.file)


def collect_case(study: Any, case: str | CaseInfo, *, write: bool = True) -> CaseRecord:
    """Collect one case of ``study`` (a loaded ``Study``) and write its ``record.json``.

    ``case`` is a case id (its ``case.json`` gives point, level, parameters and sizes) or a
    ``CaseInfo``. Returns the ``CaseRecord``; a bad output never raises, it is recorded failed with
    its reason. Raises ``CollectError`` if the study's quantities are invalid.
    """
    info = study_info(study)
    bound = bind_study(info)
    if isinstance(case, str):
        found = read_case_json(info, case)
        if found is None:  # not rendered yet: the design still knows its point and level
            found = next((c for c in design_cases(info, study) if c.case == case), None)
        case = found if found is not None else CaseInfo(case)
    return collect_one(info, bound, case, write=write)
