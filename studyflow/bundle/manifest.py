"""The bundle manifest: every shipped file with its SHA-256, size and role, and the comparison
of a folder against it (missing, altered, unexpected).

The manifest lives at ``MANIFEST.json`` in the bundle root and lists every other file of the
bundle by its POSIX path relative to that root. It cannot list itself; ``pack`` prints the
manifest's own digest so a reviewer can check it against a value sent separately.
"""

from __future__ import annotations

import json
import os
from dataclasses import dataclass, field
from pathlib import Path, PurePosixPath
from typing import Any

from ..errors import AuditError, UnsafePathError
from ..fsutil import sha256_file

MANIFEST_NAME = "MANIFEST.json"
ENVIRONMENT_NAME = "environment.json"
FORMAT = "studyflow-bundle"
FORMAT_VERSION = 1


@dataclass(frozen=True)
class FileEntry:
    path: str  # POSIX, relative to the bundle root
    sha256: str
    size: int
    role: str

    def to_json(self) -> dict[str, Any]:
        return {"path": self.path, "sha256": self.sha256, "size": self.size, "role": self.role}


@dataclass
class Manifest:
    """What a bundle holds and how its study is laid out inside it."""

    study_name: str
    study_dir: str  # bundle path of the study folder, e.g. "payload/studies/plate"
    study_file: str  # bundle path of the study file
    template: dict[str, Any] | None  # {"declared": ..., "stored": ..., "inside_study": bool}
    created: str
    studyflow_version: str
    options: dict[str, Any] = field(default_factory=dict)
    files: list[FileEntry] = field(default_factory=list)
    skipped: list[dict[str, str]] = field(default_factory=list)

    def to_json(self) -> dict[str, Any]:
        return {
            "format": FORMAT,
            "format_version": FORMAT_VERSION,
            "study_name": self.study_name,
            "study_dir": self.study_dir,
            "study_file": self.study_file,
            "template": self.template,
            "created": self.created,
            "studyflow_version": self.studyflow_version,
            "options": self.options,
            "skipped": self.skipped,
            "files": [f.to_json() for f in sorted(self.files, key=lambda f: f.path)],
        }

    def dumps(self) -> bytes:
        return (json.dumps(self.to_json(), indent=1, sort_keys=True) + "\n").encode("utf-8")

    def by_path(self) -> dict[str, FileEntry]:
        return {f.path: f for f in self.files}

    def check_paths(self, source: str = MANIFEST_NAME) -> None:
        """Refuse a manifest whose paths would lead outside the bundle (a crafted manifest must
        not make the audit read or write elsewhere)."""
        named = [("study_dir", self.study_dir), ("study_file", self.study_file)]
        if self.template and self.template.get("stored") is not None:
            named.append(("template.stored", str(self.template["stored"])))
        named += [(f"files[{i}].path", f.path) for i, f in enumerate(self.files)]
        for key, value in named:
            p = PurePosixPath(value)
            if not value or p.is_absolute() or ".." in p.parts or "\\" in value or "\x00" in value:
                raise UnsafePathError(f"{source}: {key}: path {value!r} would lead outside the bundle")

    @classmethod
    def from_json(cls, data: Any, source: str = MANIFEST_NAME) -> Manifest:
        if not isinstance(data, dict) or data.get("format") != FORMAT:
            raise AuditError(f"{source}: not a studyflow bundle manifest (key 'format' is not {FORMAT!r})")
        version = data.get("format_version")
        if version != FORMAT_VERSION:
            raise AuditError(
                f"{source}: format_version: this studyflow reads version {FORMAT_VERSION} (got {version!r})"
            )
        try:
            manifest = cls._from_json(data)
        except (KeyError, TypeError, ValueError) as exc:
            raise AuditError(f"{source}: malformed manifest entry ({exc!r})") from exc
        manifest.check_paths(source)
        return manifest

    @classmethod
    def _from_json(cls, data: dict[str, Any]) -> Manifest:
        files = [
            FileEntry(str(f["path"]), str(f["sha256"]), int(f["size"]), str(f.get("role", "other")))
            for f in data["files"]
        ]
        return cls(
            study_name=str(data["study_name"]),
            study_dir=str(data["study_dir"]),
            study_file=str(data["study_file"]),
            template=data.get("template"),
            created=str(data.get("created", "")),
            studyflow_version=str(data.get("studyflow_version", "")),
            options=dict(data.get("options") or {}),
            files=files,
            skipped=list(data.get("skipped") or []),
        )

    @classmethod
    def load(cls, root: str | os.PathLike) -> Manifest:
        path = Path(root) / MANIFEST_NAME
        try:
            data = json.loads(path.read_text(encoding="utf-8"))
        except FileNotFoundError as exc:
            raise AuditError(f"{path}: the bundle has no manifest") from exc
        except (UnicodeDecodeError, json.JSONDecodeError) as exc:
            raise AuditError(f"{path}: the manifest is not valid JSON ({exc})") from exc
        return cls.from_json(data, str(path))


@dataclass(frozen=True)
class Altered:
    path: str
    expected_sha256: str
    actual_sha256: str
    expected_size: int
    actual_size: int


@dataclass
class VerifyResult:
    checked: int = 0
    missing: list[str] = field(default_factory=list)
    altered: list[Altered] = field(default_factory=list)
    unexpected: list[str] = field(default_factory=list)
    unsafe: list[str] = field(default_factory=list)  # links leading outside, special files

    @property
    def ok(self) -> bool:
        return not (self.missing or self.altered or self.unexpected or self.unsafe)

    def to_json(self) -> dict[str, Any]:
        return {
            "ok": self.ok,
            "checked": self.checked,
            "missing": self.missing,
            "altered": [a.__dict__ for a in self.altered],
            "unexpected": self.unexpected,
            "unsafe": self.unsafe,
        }


def list_tree(root: Path) -> tuple[list[str], list[str]]:
    """Every regular file below ``root`` as POSIX relative paths, and the entries that are not
    plain files or folders (links, FIFOs, devices), which a bundle never contains."""
    files: list[str] = []
    odd: list[str] = []
    for dirpath, dirnames, filenames in os.walk(root):
        base = Path(dirpath)
        for name in list(dirnames):
            p = base / name
            if p.is_symlink():
                odd.append(p.relative_to(root).as_posix())
                dirnames.remove(name)
        for name in filenames:
            p = base / name
            rel = p.relative_to(root).as_posix()
            if p.is_symlink() or not p.is_file():
                odd.append(rel)
            else:
                files.append(rel)
    return sorted(files), sorted(odd)


def verify_tree(root: str | os.PathLike, manifest: Manifest) -> VerifyResult:
    """Compare the files below ``root`` with the manifest: hash and size of every listed file,
    plus files present but not listed. Links and special files are reported as unsafe and
    never read."""
    root = Path(root)
    present, odd = list_tree(root)
    present_set = set(present) - {MANIFEST_NAME}
    result = VerifyResult(unsafe=odd)
    listed = manifest.by_path()
    for path, entry in sorted(listed.items()):
        if path not in present_set:
            if path not in odd:
                result.missing.append(path)
            continue
        result.checked += 1
        full = root / path
        size = full.stat().st_size
        digest = sha256_file(full)
        if digest != entry.sha256 or size != entry.size:
            result.altered.append(Altered(path, entry.sha256, digest, entry.size, size))
    result.unexpected = sorted(present_set - set(listed))
    return result
