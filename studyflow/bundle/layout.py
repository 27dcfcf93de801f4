"""Where a study's files go in a bundle, and which of them go at all.

A bundle keeps the study folder and its template folder in the same relative position they
had on the packing machine, below ``payload/``: a study at ``<base>/studies/plate`` whose file
says ``template: ../../templates/plate`` is stored as ``payload/studies/plate`` and
``payload/templates/plate``. The study file is shipped byte for byte and still finds its
templates, in the bundle and in any scratch copy of it. A template given as an absolute path
cannot keep its position; it is stored under ``payload/_templates/<name>`` and the mapping is
recorded so the audit can point the study at it.
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path, PurePosixPath
from typing import Any

import yaml

from ..errors import InputError, Problem

PAYLOAD = "payload"

# Folders of a study that are machine state, not evidence: the workflow engine's own
# bookkeeping and Python caches.
SKIP_DIRS = {".snakemake", "__pycache__", ".pytest_cache", ".hypothesis"}
SKIP_SUFFIXES = (".lock", ".pyc", ".tmp")

# Files holding solution fields; left out with ``--no-fields``.
FIELD_SUFFIXES = (".vtu", ".vtk", ".vtp", ".vts", ".vtr", ".vti", ".pvd", ".pvtu", ".h5", ".hdf5",
                  ".xdmf", ".xmf", ".msh", ".npz", ".npy", ".cgns", ".plt", ".dat.gz")


@dataclass(frozen=True)
class StudyLayout:
    study_file: Path  # absolute
    study_dir: Path  # absolute
    template_dir: Path | None  # absolute, resolved
    template_declared: str | None  # as written in the study file
    base: Path  # common ancestor of study and template folders
    raw: dict[str, Any]  # the study file as parsed YAML (for the keys the bundle reads)

    @property
    def study_rel(self) -> str:
        return self.study_dir.relative_to(self.base).as_posix() or "."

    @property
    def template_inside_study(self) -> bool:
        return self.template_dir is not None and (
            self.template_dir == self.study_dir or self.study_dir in self.template_dir.parents)

    def template_rel(self) -> str | None:
        if self.template_dir is None:
            return None
        if self.template_declared is not None and os.path.isabs(self.template_declared):
            return f"_templates/{self.template_dir.name}"
        return self.template_dir.relative_to(self.base).as_posix()


def read_raw(study_file: Path) -> dict[str, Any]:
    # the study loader's YAML 1.2 number rules; imported here, as the packer loads the study anyway
    from ..spec.yamlsource import load_yaml_text

    try:
        data = load_yaml_text(study_file.read_text(encoding="utf-8"))
    except FileNotFoundError as exc:
        raise InputError(Problem(str(study_file), "", str(study_file), "study file not found")) from exc
    except yaml.YAMLError as exc:
        raise InputError(Problem(str(study_file), "", None, f"not valid YAML: {exc}")) from exc
    if not isinstance(data, dict):
        raise InputError(Problem(str(study_file), "", type(data).__name__, "a study file is a mapping"))
    return data


def locate(study: str | os.PathLike) -> StudyLayout:
    """The layout of the study given by its file or its folder (which then holds ``study.yaml``)."""
    path = Path(study).resolve()
    study_file = path / "study.yaml" if path.is_dir() else path
    raw = read_raw(study_file)
    study_dir = study_file.parent
    declared = raw.get("template")
    template_dir: Path | None = None
    if declared is not None:
        if not isinstance(declared, str) or not declared.strip():
            raise InputError(Problem(str(study_file), "template", declared, "must be a folder path"))
        template_dir = (study_dir / declared).resolve()
        if not template_dir.is_dir():
            raise InputError(Problem(str(study_file), "template", declared,
                                     f"template folder {template_dir} does not exist"))
    if template_dir is None or os.path.isabs(str(declared)):
        base = study_dir.parent
    else:
        base = Path(os.path.commonpath([study_dir.parent, template_dir]))
    return StudyLayout(study_file, study_dir, template_dir, declared, base, raw)


def field_files(raw: dict[str, Any]) -> set[str]:
    """Files named by ``from: field`` quantities (relative to a case folder)."""
    out: set[str] = set()
    for spec in (raw.get("quantities") or {}).values():
        if isinstance(spec, dict) and spec.get("from") == "field" and isinstance(spec.get("file"), str):
            out.add(PurePosixPath(spec["file"]).as_posix())
    return out


def history_files(raw: dict[str, Any]) -> set[str]:
    out: set[str] = set()
    for spec in (raw.get("quantities") or {}).values():
        if isinstance(spec, dict) and spec.get("series") and isinstance(spec.get("file"), str):
            out.add(PurePosixPath(spec["file"]).as_posix())
    return out


def role_of(study_rel_path: PurePosixPath, fields: set[str], histories: set[str]) -> str:
    """The role of a file of the study folder, by where it is (DEVELOPERS.md folder layout)."""
    parts = study_rel_path.parts
    if len(parts) == 1:
        return "study-file" if parts[0] == "study.yaml" else "study-extra"
    top = parts[0]
    if top == "cases" and len(parts) >= 3:
        inner = PurePosixPath(*parts[2:])
        inner_s = inner.as_posix()
        if inner.parts[0] == "logs":
            return "log"
        if inner.parts[0] == ".studyflow":
            return "case-record" if inner.name == "record.json" else "case-state"
        if inner_s in fields or inner_s.lower().endswith(FIELD_SUFFIXES):
            return "field"
        if inner_s in histories:
            return "history"
        return "case-file"
    if top == "results":
        return "uncertainty" if parts[-1].startswith("uncertainty") else "results"
    if top == "report":
        return "report"
    if top == ".studyflow":
        return "run-log"
    return "study-extra"


def is_skipped(rel: PurePosixPath) -> bool:
    return any(p in SKIP_DIRS for p in rel.parts) or rel.name.endswith(SKIP_SUFFIXES)


@dataclass(frozen=True)
class Member:
    source: Path  # file on disk
    path: str  # POSIX path in the bundle
    role: str


def select(layout: StudyLayout, fields: bool = True,
           inputs: set[str] | None = None) -> tuple[list[Member], list[dict[str, str]]]:
    """Every file of the study and template folders to ship, and the ones left out with why.

    ``inputs``: paths inside the study folder (``cases/<id>/<file>``) that rendering makes; they
    get the role ``case-input``."""
    inputs = inputs or set()
    members: list[Member] = []
    skipped: list[dict[str, str]] = []
    fset, hset = field_files(layout.raw), history_files(layout.raw)
    study_prefix = PurePosixPath(PAYLOAD) / layout.study_rel

    def walk(root: Path, prefix: PurePosixPath, role_for) -> None:
        real_root = root.resolve()
        for dirpath, dirnames, filenames in os.walk(root):
            base = Path(dirpath)
            dirnames.sort()
            for name in list(dirnames):
                rel = (base / name).relative_to(root)
                if name in SKIP_DIRS:
                    dirnames.remove(name)
                elif (base / name).is_symlink():
                    # following folder links could loop or pull in a whole disk
                    skipped.append({"path": (prefix / rel.as_posix()).as_posix(), "why": "link to a folder"})
                    dirnames.remove(name)
            for name in sorted(filenames):
                src = base / name
                rel = PurePosixPath(src.relative_to(root).as_posix())
                if is_skipped(rel):
                    continue
                bundle_path = (prefix / rel).as_posix()
                if not src.exists():
                    skipped.append({"path": bundle_path, "why": "dangling link"})
                    continue
                if src.is_symlink() and real_root not in src.resolve().parents:
                    # a link a solver planted must not ship a file from elsewhere to a stranger
                    skipped.append({"path": bundle_path, "why": "link to a file outside the folder"})
                    continue
                if not src.is_file():
                    skipped.append({"path": bundle_path, "why": "not a regular file"})
                    continue
                role = role_for(rel)
                if role is None:
                    continue
                if role == "field" and not fields:
                    skipped.append({"path": bundle_path, "why": "field file (--no-fields)"})
                    continue
                members.append(Member(src, bundle_path, role))

    template_dir = layout.template_dir
    inside = layout.template_inside_study

    def study_role(rel: PurePosixPath) -> str | None:
        if inside and template_dir is not None:
            full = layout.study_dir / rel
            if template_dir in full.parents:
                return "template"
        if rel.as_posix() in inputs:
            return "case-input"
        return role_of(rel, fset, hset)

    walk(layout.study_dir, study_prefix, study_role)
    if template_dir is not None and not inside:
        walk(template_dir, PurePosixPath(PAYLOAD) / layout.template_rel(), lambda rel: "template")
    members.sort(key=lambda m: m.path)
    return members, skipped
