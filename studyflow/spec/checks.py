"""Rules of a study file that tie keys together, checked on the raw YAML data.

They run even when the schema check failed elsewhere, so one pass reports every problem. Each
check skips values of the wrong type: the schema already reports those.
"""

from __future__ import annotations

import keyword
import math
import re
from pathlib import Path, PurePosixPath
from typing import Any, Iterator

from ..errors import Problem
from .yamlsource import KeyPath, YamlSource

# Names the template context defines itself (DEVELOPERS.md, "Template context").
RESERVED = frozenset({"case", "point", "params", "mesh"})
# Names Jinja reads as literals or operators.
JINJA_WORDS = frozenset({"true", "false", "none", "True", "False", "None", "and", "or", "not", "in", "is",
                         "if", "else", "loop", "self", "range", "namespace"})
MESH_RESERVED = frozenset({"level", "levels", "h", "ratio", "cells", "sizes"})
IDENT = re.compile(r"^[A-Za-z_][A-Za-z0-9_]*$")
STEP_NAME = re.compile(r"^[A-Za-z][A-Za-z0-9_]*$")
# Point ids name folders: letters, digits, '.', '_', '-', no '--' (it separates the mesh level).
POINT_ID = re.compile(r"^[A-Za-z0-9][A-Za-z0-9._-]*$")
QUANTITY_NAME = re.compile(r"^[A-Za-z][A-Za-z0-9_.-]*$")
KINDS = ("product", "zip", "table", "one-at-a-time", "lhs", "sobol")
MAX_POINT_ID = 80


def _num(v: Any) -> bool:
    return isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v)


def name_problem(name: Any) -> str | None:
    """Why ``name`` cannot be a parameter or constant name, or None if it can."""
    if not isinstance(name, str) or not IDENT.match(name):
        return "must be a valid identifier (letters, digits, '_', not starting with a digit)"
    if name in RESERVED:
        return f"is a reserved name of the template context ({', '.join(sorted(RESERVED))})"
    if keyword.iskeyword(name) or name in JINJA_WORDS:
        return "is a reserved word of the template language"
    return None


def case_path_problem(path: Any) -> str | None:
    """Why ``path`` is not a safe path inside a case folder, or None."""
    if not isinstance(path, str) or not path.strip():
        return "must be a non-empty relative path"
    if path.startswith("/") or re.match(r"^[A-Za-z]:[\\/]", path) or path.startswith("~"):
        return "must be relative to the case folder, not absolute"
    parts = PurePosixPath(path.replace("\\", "/")).parts
    if ".." in parts:
        return "must stay inside the case folder ('..' is not allowed)"
    if parts and parts[0] == ".studyflow":
        return "must not be inside .studyflow/ (studyflow's own files)"
    if any(c in path for c in "{}*?[]"):
        return "must be a plain path (no wildcards or braces)"
    return None


def _items(d: Any) -> Iterator[tuple[Any, Any]]:
    return iter(d.items()) if isinstance(d, dict) else iter(())


def check_study(src: YamlSource, study_dir: Path) -> list[Problem]:
    data = src.data
    if not isinstance(data, dict):
        return []
    out: list[Problem] = []
    p = src.problem

    constants = data.get("constants") if isinstance(data.get("constants"), dict) else {}
    for name, _ in _items(constants):
        why = name_problem(name)
        if why:
            out.append(p(("constants", name), name, f"constant name {why}"))

    # --- template folder --------------------------------------------------------------------
    template = data.get("template")
    template_dir: Path | None = None
    if isinstance(template, str) and template.strip():
        candidate = (study_dir / template).resolve()
        if not candidate.exists():
            out.append(p(("template",), template, f"template folder does not exist: {candidate}"))
        elif not candidate.is_dir():
            out.append(p(("template",), template, f"template must be a folder: {candidate}"))
        else:
            template_dir = candidate

    out += _check_parameters(src, data.get("parameters"), set(constants) if isinstance(constants, dict) else set())
    out += _check_mesh(src, data.get("mesh"), data.get("quantities"))
    out += _check_steps(src, data.get("steps"), template_dir)
    out += _check_quantities(src, data.get("quantities"), data.get("iteration"))
    return out


def _check_parameters(src: YamlSource, blocks: Any, constants: set[str]) -> list[Problem]:
    out: list[Problem] = []
    if not isinstance(blocks, list):
        return out
    p = src.problem
    table_ids: dict[str, KeyPath] = {}

    def names(path: KeyPath, mapping: Any) -> None:
        for name, _ in _items(mapping):
            why = name_problem(name)
            if why:
                out.append(p(path + (name,), name, f"parameter name {why}"))
            elif name in constants:
                out.append(p(path + (name,), name, "parameter name is also a constant; use one or the other"))

    for i, block in enumerate(blocks):
        if not isinstance(block, dict):
            continue
        kind = block.get("kind")
        base: KeyPath = ("parameters", i)
        if kind in ("product", "zip"):
            values = block.get("values")
            names(base + ("values",), values)
            if kind == "zip" and isinstance(values, dict):
                lengths = {k: len(v) for k, v in values.items() if isinstance(v, list)}
                if len(set(lengths.values())) > 1:
                    desc = ", ".join(f"{k}: {n}" for k, n in lengths.items())
                    out.append(p(base + ("values",), lengths, f"zip lists must have equal lengths ({desc})"))
        elif kind == "table":
            points = block.get("points")
            for j, point in enumerate(points if isinstance(points, list) else []):
                if not isinstance(point, dict):
                    out.append(p(base + ("points", j), point, "a point must be a mapping of parameter values"))
                    continue
                pid = point.get("id")
                if "id" in point:
                    if not isinstance(pid, str) or not POINT_ID.match(pid) or "--" in pid:
                        out.append(p(base + ("points", j, "id"), pid,
                                     "point id must use letters, digits, '.', '_', '-' (no '--')"))
                    elif len(pid) > MAX_POINT_ID:
                        out.append(p(base + ("points", j, "id"), pid,
                                     f"point id is longer than {MAX_POINT_ID} characters"))
                    elif pid in table_ids:
                        out.append(p(base + ("points", j, "id"), pid, "point id is used twice"))
                    else:
                        table_ids[pid] = base + ("points", j, "id")
                names(base + ("points", j), {k: v for k, v in point.items() if k != "id"})
                for k, v in point.items():
                    if k != "id" and not (isinstance(v, (bool, str)) or _num(v)):
                        out.append(p(base + ("points", j, k), v, "must be a finite number, a string or a boolean"))
        elif kind == "one-at-a-time":
            b, vary = block.get("base"), block.get("vary")
            names(base + ("base",), b)
            for name, values in _items(vary):
                if isinstance(b, dict) and name not in b:
                    out.append(p(base + ("vary", name), name, "varied parameter is not in base"))
                if isinstance(values, list) and not values:
                    out.append(p(base + ("vary", name), values, "must list at least one value"))
        elif kind in ("lhs", "sobol"):
            ranges = block.get("ranges")
            names(base + ("ranges",), ranges)
            for name, rng in _items(ranges):
                if not isinstance(rng, dict):
                    continue
                low, high = rng.get("low"), rng.get("high")
                where = base + ("ranges", name)
                if _num(low) and _num(high) and not low < high:
                    out.append(p(where + ("low",), low, f"low must be less than high ({high})"))
                if rng.get("scale") == "log" and _num(low) and low <= 0:
                    out.append(p(where + ("low",), low, "a log-scaled range needs low > 0"))
    return out


def _check_mesh(src: YamlSource, mesh: Any, quantities: Any) -> list[Problem]:
    out: list[Problem] = []
    if not isinstance(mesh, dict):
        return out
    p = src.problem
    given = [k for k in ("counts", "spacings", "list") if mesh.get(k) is not None]
    if len(given) != 1:
        out.append(p(("mesh",), given, "give exactly one of counts, spacings or list"))
    levels = mesh.get("levels")
    ratio = mesh.get("ratio")
    if isinstance(ratio, list) and isinstance(levels, int) and not isinstance(levels, bool):
        if len(ratio) != levels - 1:
            out.append(p(("mesh", "ratio"), ratio,
                         f"a list of ratios needs levels - 1 = {levels - 1} entries, one per refinement step"))
    if mesh.get("list") is not None and levels is not None:
        lst = mesh.get("list")
        if isinstance(lst, list) and isinstance(levels, int) and levels != len(lst):
            out.append(p(("mesh", "levels"), levels, f"levels disagrees with the {len(lst)} entries of mesh.list"))
    for key in ("counts", "spacings"):
        sizes = mesh.get(key)
        for name, v in _items(sizes):
            if not (isinstance(name, str) and IDENT.match(name)) or name in MESH_RESERVED:
                out.append(p(("mesh", key, name), name,
                             f"size name must be an identifier other than {', '.join(sorted(MESH_RESERVED))}"))
            if _num(v) and v <= 0:
                out.append(p(("mesh", key, name), v, "must be positive"))
        if isinstance(sizes, dict) and not sizes:
            out.append(p(("mesh", key), sizes, "must name at least one size"))
    extent = mesh.get("extent")
    counts = mesh.get("counts")
    if isinstance(extent, list):
        if isinstance(counts, dict) and len(extent) != len(counts):
            out.append(p(("mesh", "extent"), extent,
                         f"extent needs one length per direction of counts ({len(counts)})"))
        for j, v in enumerate(extent):
            if _num(v) and v <= 0:
                out.append(p(("mesh", "extent", j), v, "must be positive"))
        if counts is None:
            out.append(p(("mesh", "extent"), extent, "extent is used with counts only"))
    lst = mesh.get("list")
    if isinstance(lst, list):
        keys = None
        hs = []
        for j, entry in enumerate(lst):
            if not isinstance(entry, dict):
                continue
            for name, v in entry.items():
                if name != "h" and (not (isinstance(name, str) and IDENT.match(name)) or name in MESH_RESERVED):
                    out.append(p(("mesh", "list", j, name), name, "size name must be an identifier"))
                if _num(v) and v <= 0:
                    out.append(p(("mesh", "list", j, name), v, "must be positive"))
            if keys is None:
                keys = set(entry)
            elif set(entry) != keys:
                out.append(p(("mesh", "list", j), sorted(entry), f"every level must give the same sizes "
                                                                 f"({', '.join(sorted(keys))})"))
            hs.append(entry.get("h"))
        if all(_num(h) for h in hs) and any(b >= a for a, b in zip(hs, hs[1:])):
            out.append(p(("mesh", "list"), hs, "levels must go from coarse to fine (h must decrease)"))
    cells_from = mesh.get("cells_from")
    if cells_from is not None:
        if isinstance(quantities, dict) and cells_from not in quantities:
            out.append(p(("mesh", "cells_from"), cells_from, "is not a quantity of this study"))
        if mesh.get("measure") is None:
            out.append(p(("mesh", "measure"), None, "is required with cells_from (the domain length, area or volume)"))
    return out


def _check_steps(src: YamlSource, steps: Any, template_dir: Path | None) -> list[Problem]:
    out: list[Problem] = []
    if not isinstance(steps, list):
        return out
    p = src.problem
    seen: dict[str, int] = {}
    written: set[str] = set()
    for i, step in enumerate(steps):
        if not isinstance(step, dict):
            continue
        name = step.get("name")
        if isinstance(name, str):
            if not STEP_NAME.match(name):
                out.append(p(("steps", i, "name"), name,
                             "step name must start with a letter and use letters, digits and '_'"))
            elif name in seen:
                out.append(p(("steps", i, "name"), name, f"step name is used twice (also steps[{seen[name]}])"))
            else:
                seen[name] = i
        for key in ("reads", "writes"):
            paths = step.get(key)
            for j, path in enumerate(paths if isinstance(paths, list) else []):
                why = case_path_problem(path)
                if why:
                    out.append(p(("steps", i, key, j), path, why))
                elif key == "reads" and template_dir is not None:
                    norm = str(PurePosixPath(path))
                    if norm not in written and not (template_dir / norm).is_file():
                        out.append(p(("steps", i, key, j), path,
                                     "is neither a file of the template folder nor written by an earlier step"))
        for path in step.get("writes") if isinstance(step.get("writes"), list) else []:
            if isinstance(path, str):
                written.add(str(PurePosixPath(path)))
    return out


def _check_quantities(src: YamlSource, quantities: Any, iteration: Any) -> list[Problem]:
    out: list[Problem] = []
    p = src.problem
    for name, q in _items(quantities):
        if not isinstance(name, str) or not QUANTITY_NAME.match(name):
            out.append(p(("quantities", name), name,
                         "quantity name must start with a letter and use letters, digits, '_', '.', '-'"))
        if isinstance(q, dict) and isinstance(q.get("file"), str):
            why = case_path_problem(q["file"])
            if why and not q["file"].startswith(".studyflow/"):
                out.append(p(("quantities", name, "file"), q["file"], why))
    if isinstance(iteration, dict) and isinstance(quantities, dict):
        residuals = iteration.get("residuals")
        for j, r in enumerate(residuals if isinstance(residuals, list) else []):
            if isinstance(r, str) and r not in quantities:  # other types: the schema reports them
                out.append(p(("iteration", "residuals", j), r, "is not a quantity of this study"))
        # ``flag`` may name a quantity the collection layer finds without a declaration (DEVELOPERS.md).
    return out
