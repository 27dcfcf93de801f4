"""The few study-file settings the report needs, read straight from ``study.yaml``.

The report reads the raw YAML rather than the full validated model so that it can still describe a
study whose file was edited after the run (it reports what was run; validation belongs to ``spec``).
The optional ``report:`` block is checked here, with errors naming file, key and value:

```yaml
report:
  references:                  # reference curves drawn over a quantity
    cf:                        # quantity name
      file: data/cf_ref.csv    # CSV inside the study folder
      x: x                     # column for the abscissa: the profile coordinate, or a swept parameter
      y: cf                    # column for the reference value
      label: Blasius (1908)    # optional legend text
      point: Re1e4             # optional: draw it for this point only
    drag: {value: 0.013513, label: Blasius with leading-edge correction}   # or one reference value
  points: 12                   # optional: at most this many points drawn per convergence figure
  view: {x: [-0.05, 1.1], y: [0.0, 0.12]}   # optional: field pictures show this window only
```

``view`` suits fields whose interest lies in a thin region (a boundary layer in a large domain):
the pictures show the cells whose centres lie in the window, and a window much wider than tall
is drawn with y stretched by a stated factor.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import yaml

from ..analysis import Settings as AnalysisSettings
from ..errors import InputError, Problem
from ..fsutil import sha256_file
from ..spec.yamlsource import load_yaml_text

STUDY_FILE = "study.yaml"


@dataclass(frozen=True)
class Reference:
    """A reference curve (``file`` with columns ``x`` and ``y``) or a single reference ``value``."""

    quantity: str
    file: Path | None
    x: str | None
    y: str | None
    label: str
    point: str | None = None  # draw on this point's panels only (a reference often holds for one point)
    value: float | None = None


@dataclass(frozen=True)
class ReportSettings:
    study_file: Path | None
    title: str
    description: str = ""
    study_hash: str | None = None
    formal_order: float | None = None
    safety_factor: float | None = None
    residuals: tuple[str, ...] = ()
    tolerance: float | None = None
    steps: list[str] = field(default_factory=list)
    field_files: tuple[str, ...] = ()
    mesh_files: tuple[str, ...] = ()
    units: dict[str, str] = field(default_factory=dict)
    solver: str | None = None
    references: dict[str, Reference] = field(default_factory=dict)
    max_points: int = 12
    # quantities that are not results to assess: histories, residuals, the cell count behind h
    not_results: tuple[str, ...] = ()
    assessed: tuple[str, ...] | None = None  # analysis.quantities when the study names them
    view: tuple[float, float, float, float] | None = None  # x0, x1, y0, y1 of the field pictures


FIELD_SUFFIXES = (".vtu", ".vtk", ".vtp", ".vts", ".vtr", ".xdmf", ".xmf")
MESH_SUFFIXES = FIELD_SUFFIXES + (".msh",)  # a gmsh mesh has no fields but draws the mesh family


def _float(value: Any) -> float | None:
    try:
        return float(value)
    except (TypeError, ValueError):
        return None


def load_settings(root: Path) -> ReportSettings:
    """Read the report's settings from ``<root>/study.yaml`` (a study without the file gets defaults)."""
    path = root / STUDY_FILE
    if not path.is_file():
        return ReportSettings(study_file=None, title=root.name)
    try:
        # the study loader's number rules, so 2e3 is a number here too (PyYAML alone reads a string)
        doc = load_yaml_text(path.read_text(encoding="utf-8")) or {}
    except yaml.YAMLError as exc:
        raise InputError(Problem(str(path), "", STUDY_FILE, f"is not valid YAML: {exc}")) from exc
    if not isinstance(doc, dict):
        raise InputError(Problem(str(path), "", type(doc).__name__, "must be a mapping of keys"))
    analysis = doc.get("analysis") or {}
    iteration = doc.get("iteration") or {}
    steps = [s for s in (doc.get("steps") or []) if isinstance(s, dict)]
    quantities = doc.get("quantities") or {}
    field_files: list[str] = []
    mesh_files: list[str] = []
    for s in steps:
        for w in s.get("writes") or []:
            if isinstance(w, str) and w.lower().endswith(FIELD_SUFFIXES) and w not in field_files:
                field_files.append(w)
            if isinstance(w, str) and w.lower().endswith(MESH_SUFFIXES) and w not in mesh_files:
                mesh_files.append(w)
    for q in quantities.values() if isinstance(quantities, dict) else []:
        f = q.get("file") if isinstance(q, dict) else None
        if isinstance(f, str) and f.lower().endswith(FIELD_SUFFIXES) and f not in field_files:
            field_files.append(f)
    units = {str(k): str(v.get("unit", "-")) for k, v in quantities.items() if isinstance(v, dict)} \
        if isinstance(quantities, dict) else {}
    residuals = iteration.get("residuals") or []
    constants = doc.get("constants") or {}
    mesh = doc.get("mesh") if isinstance(doc.get("mesh"), dict) else {}
    not_results = [str(k) for k, v in (quantities.items() if isinstance(quantities, dict) else [])
                   if isinstance(v, dict) and v.get("series")]
    not_results += [str(r) for r in residuals if isinstance(r, str)] if isinstance(residuals, list) else []
    if isinstance(mesh.get("cells_from"), str):
        not_results.append(mesh["cells_from"])
    if isinstance(iteration.get("flag"), str):
        not_results.append(iteration["flag"])
    assessed = analysis.get("quantities")
    assessed = tuple(str(q) for q in assessed) if isinstance(assessed, list) else None
    report = doc.get("report") or {}
    problems: list[Problem] = []
    if not isinstance(report, dict):
        problems.append(Problem(str(path), "report", report, "must be a mapping"))
        report = {}
    refs = _references(root, path, report.get("references"), problems)
    max_points = report.get("points", 12)
    if not isinstance(max_points, int) or isinstance(max_points, bool) or max_points < 1:
        problems.append(Problem(str(path), "report.points", max_points, "must be a whole number >= 1"))
        max_points = 12
    view = _view(path, report.get("view"), problems)
    unknown = sorted(set(report) - {"references", "points", "view"})
    for key in unknown:
        problems.append(Problem(str(path), f"report.{key}", report[key],
                                "unknown key (allowed: references, points, view)"))
    if problems:
        raise InputError(problems, headline=f"{path}: the report block is invalid")
    return ReportSettings(
        study_file=path,
        title=str(doc.get("title") or root.name),
        description=str(doc.get("description") or ""),
        study_hash=sha256_file(path),
        formal_order=_float(analysis.get("formal_order")) or AnalysisSettings().formal_order,
        safety_factor=_float(analysis.get("safety_factor")),
        residuals=tuple(str(r) for r in residuals) if isinstance(residuals, list) else (),
        tolerance=_float(iteration.get("tolerance")),
        steps=[str(s.get("name")) for s in steps if s.get("name")],
        field_files=tuple(field_files),
        mesh_files=tuple(mesh_files),
        units=units,
        solver=str(constants.get("solver")) if constants.get("solver") else None,
        references=refs,
        max_points=max_points,
        not_results=tuple(dict.fromkeys(not_results)),
        assessed=assessed,
        view=view,
    )


def _view(path: Path, block: Any, problems: list[Problem]) -> tuple[float, float, float, float] | None:
    if block is None:
        return None
    if not isinstance(block, dict) or set(block) != {"x", "y"}:
        problems.append(Problem(str(path), "report.view", block, "must be {x: [low, high], y: [low, high]}"))
        return None
    out: list[float] = []
    for axis in ("x", "y"):
        pair = block[axis]
        ok = (isinstance(pair, list) and len(pair) == 2
              and all(isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v) for v in pair)
              and pair[0] < pair[1])
        if not ok:
            problems.append(Problem(str(path), f"report.view.{axis}", pair, "must be two numbers, low < high"))
            return None
        out += [float(pair[0]), float(pair[1])]
    return out[0], out[1], out[2], out[3]


def _references(root: Path, path: Path, block: Any, problems: list[Problem]) -> dict[str, Reference]:
    from ..errors import UnsafePathError
    from ..fsutil import confined  # local: keeps the module's import list short for readers

    if block is None:
        return {}
    if not isinstance(block, dict):
        problems.append(Problem(str(path), "report.references", block, "must map quantity names to {file, x, y}"))
        return {}
    out: dict[str, Reference] = {}
    for name, ref in block.items():
        key = f"report.references.{name}"
        if not isinstance(ref, dict):
            problems.append(Problem(str(path), key, ref, "must be a mapping with file, x and y"))
            continue
        allowed = {"file", "x", "y", "label", "point", "value"}
        for k in sorted(set(ref) - allowed):
            problems.append(Problem(str(path), f"{key}.{k}", ref[k], f"unknown key (allowed: {', '.join(sorted(allowed))})"))
        point = None if ref.get("point") is None else str(ref["point"])
        if "value" in ref:
            value = ref["value"]
            if isinstance(value, bool) or not isinstance(value, (int, float)):
                problems.append(Problem(str(path), f"{key}.value", value, "must be a number"))
                continue
            for k in ("file", "x", "y"):
                if k in ref:
                    problems.append(Problem(str(path), f"{key}.{k}", ref[k], "give either value or file, x and y"))
            out[str(name)] = Reference(str(name), None, None, None, str(ref.get("label") or "reference"), point,
                                       float(value))
            continue
        missing = [k for k in ("file", "x", "y") if not isinstance(ref.get(k), str) or not ref.get(k)]
        for k in missing:
            problems.append(Problem(str(path), f"{key}.{k}", ref.get(k), "is required (or give a value) and must be a text"))
        if missing or set(ref) - allowed:
            continue
        try:
            file = confined(root, ref["file"], what=f"{key}.file")
        except UnsafePathError as exc:
            problems.append(Problem(str(path), f"{key}.file", ref["file"], str(exc)))
            continue
        if not file.is_file():
            problems.append(Problem(str(path), f"{key}.file", ref["file"], "no such file in the study folder"))
            continue
        out[str(name)] = Reference(str(name), file, ref["x"], ref["y"], str(ref.get("label") or ref["file"]), point)
    return out
