"""Pack a study into one reviewer bundle: a gzip-compressed tar archive.

The archive holds one top folder ``<study>-bundle/`` with ``MANIFEST.json`` first, then
``environment.json`` and the payload (see ``layout``) in sorted order. Members carry fixed
owner, group and modes and one timestamp, and the gzip header no file name, so the same study
packed twice with ``SOURCE_DATE_EPOCH`` set gives the same bytes.
"""

from __future__ import annotations

import calendar
import gzip
import hashlib
import io
import json
import os
import shlex
import tarfile
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, BinaryIO

import studyflow

from ..errors import StudyflowError
from ..fsutil import atomic_output, sha256_bytes
from ..workflow.lock import RunLock
from . import environment as env
from .layout import PAYLOAD, StudyLayout, locate, select
from .manifest import ENVIRONMENT_NAME, MANIFEST_NAME, FileEntry, Manifest
from .tolerances import settings_from


class PackError(StudyflowError):
    """The study could not be packed (a file changed while packing, the target is not writable)."""


@dataclass
class PackResult:
    archive: Path
    manifest_sha256: str
    files: int
    bytes: int
    skipped: list[dict[str, str]] = field(default_factory=list)
    solvers: dict[str, Any] = field(default_factory=dict)
    warnings: list[str] = field(default_factory=list)

    def to_json(self) -> dict[str, Any]:
        return {"archive": str(self.archive), "manifest_sha256": self.manifest_sha256, "files": self.files,
                "bytes": self.bytes, "skipped": self.skipped, "solvers": self.solvers, "warnings": self.warnings}


def _hash_file(path: Path) -> tuple[str, int]:
    h = hashlib.sha256()
    size = 0
    with open(path, "rb") as fh:
        while block := fh.read(1 << 20):
            h.update(block)
            size += len(block)
    return h.hexdigest(), size


def _solver_commands(layout: StudyLayout) -> dict[str, str | None]:
    """The program each step starts, with a case folder it runs in: from the rendered step
    records when there are any, else from the study file's ``run`` with constants filled in."""
    found: dict[str, str | None] = {}
    for rec in sorted(layout.study_dir.glob("cases/*/.studyflow/*.step.json")):
        try:
            argv = json.loads(rec.read_text(encoding="utf-8")).get("argv")
        except (OSError, ValueError, AttributeError):
            continue
        if isinstance(argv, list) and argv and isinstance(argv[0], str):
            found.setdefault(argv[0], str(rec.parent.parent))
    if found:
        return found
    constants = layout.raw.get("constants") or {}
    for step in layout.raw.get("steps") or []:
        run = step.get("run") if isinstance(step, dict) else None
        first = (shlex.split(run) if isinstance(run, str) else run or [None])[0]
        if not isinstance(first, str):
            continue
        if "{{" in first:
            import jinja2
            from jinja2.sandbox import ImmutableSandboxedEnvironment

            try:
                env_ = ImmutableSandboxedEnvironment(undefined=jinja2.StrictUndefined)
                first = env_.from_string(first).render(**constants)
            except jinja2.TemplateError:  # a name only a case defines: leave the command unprobed
                continue
        found.setdefault(first, None)
    return found


def _run_history(layout: StudyLayout) -> tuple[list[Any], dict[str, str]]:
    """The command lines used and the span of run dates.

    Command lines: every distinct argument list each step ran with (from the rendered step
    records, with how many cases used it), and the study's run records under ``.studyflow/``
    (``run.json`` and any JSON-lines run log), keeping any ``argv``/``command`` they hold.
    """
    commands: list[Any] = []
    per_step: dict[tuple[str, tuple[str, ...]], int] = {}
    for rec in sorted(layout.study_dir.glob("cases/*/.studyflow/*.step.json")):
        try:
            doc = json.loads(rec.read_text(encoding="utf-8"))
        except (OSError, ValueError):
            continue
        if isinstance(doc, dict) and isinstance(doc.get("argv"), list):
            key = (str(doc.get("step")), tuple(str(a) for a in doc["argv"]))
            per_step[key] = per_step.get(key, 0) + 1
    by_step: dict[str, list[tuple[tuple[str, ...], int]]] = {}
    for (step, argv), n in per_step.items():
        by_step.setdefault(step, []).append((argv, n))
    for step, uses in sorted(by_step.items()):
        uses.sort(key=lambda u: (-u[1], u[0]))
        for argv, n in uses[:20]:
            commands.append({"source": "step", "step": step, "argv": list(argv), "cases": n})
        if len(uses) > 20:
            commands.append({"source": "step", "step": step, "more_distinct_argv": len(uses) - 20})
    state = layout.study_dir / ".studyflow"
    for rec in sorted(state.glob("*.json")) + sorted(state.glob("*.jsonl")) if state.is_dir() else []:
        try:
            lines = rec.read_text(encoding="utf-8", errors="replace").splitlines()
        except OSError:
            continue
        docs = []
        if rec.suffix == ".json":
            try:
                docs = [json.loads("\n".join(lines))]
            except ValueError:
                docs = []
        else:
            for line in lines[-500:]:
                try:
                    docs.append(json.loads(line))
                except ValueError:
                    continue
        for d in docs:
            if isinstance(d, dict):
                commands.append({"source": rec.name, **{k: d[k] for k in sorted(d)
                                                        if isinstance(d[k], (str, int, float, bool, list))}})
    starts, ends = [], []
    for rec in layout.study_dir.glob("cases/*/.studyflow/*.status.json"):
        try:
            data = json.loads(rec.read_text(encoding="utf-8"))
        except (OSError, ValueError):
            continue
        if isinstance(data, dict):
            if isinstance(data.get("started"), str):
                starts.append(data["started"])
            if isinstance(data.get("ended"), str):
                ends.append(data["ended"])
    dates = {}
    if starts:
        dates["first_step_started"] = min(starts)
    if ends:
        dates["last_step_ended"] = max(ends)
    return commands, dates


def _outside_files(layout: StudyLayout, limit: int = 10) -> list[str]:
    """Files named in the steps' arguments (relative or absolute paths that exist) that lie
    outside the study folder and its template folder, so a bundle cannot carry them."""
    keep = [layout.study_dir] + ([layout.template_dir] if layout.template_dir is not None else [])
    found: set[str] = set()
    for rec in sorted(layout.study_dir.glob("cases/*/.studyflow/*.step.json")):
        try:
            argv = json.loads(rec.read_text(encoding="utf-8")).get("argv") or []
        except (OSError, ValueError, AttributeError):
            continue
        case_dir = rec.parent.parent
        for i, tok in enumerate(argv):
            if not isinstance(tok, str) or "/" not in tok or tok.startswith("-"):
                continue
            p = (case_dir / tok).resolve() if not os.path.isabs(tok) else Path(tok)
            if i == 0 and os.path.isabs(tok):
                continue  # an installed program: its version is recorded, not its bytes
            if p.exists() and not any(p == k or k in p.parents for k in keep):
                found.add(str(p))
        if len(found) >= limit:
            break
    return sorted(found)[:limit]


def _epoch(created: str) -> int:
    return calendar.timegm(time.strptime(created, "%Y-%m-%dT%H:%M:%SZ"))


def _info(name: str, size: int, mtime: int, executable: bool = False) -> tarfile.TarInfo:
    ti = tarfile.TarInfo(name)
    ti.size = size
    ti.mtime = mtime
    ti.mode = 0o755 if executable else 0o644
    ti.uid = ti.gid = 0
    ti.uname = ti.gname = ""
    ti.type = tarfile.REGTYPE
    return ti


class _CheckedReader(io.RawIOBase):
    """Reads a file into the archive while hashing it, so a file that changed since it was
    listed in the manifest is caught."""

    def __init__(self, fh: BinaryIO):
        self.fh = fh
        self.h = hashlib.sha256()

    def readable(self) -> bool:
        return True

    def readinto(self, b) -> int:  # type: ignore[override]
        data = self.fh.read(len(b))
        self.h.update(data)
        b[: len(data)] = data
        return len(data)


def default_archive_name(layout: StudyLayout) -> str:
    return f"{layout.study_dir.name}-bundle.tar.gz"


def pack(study: str | os.PathLike, archive: str | os.PathLike | None = None, *, fields: bool = True,
         compresslevel: int = 6) -> PackResult:
    """Pack the study (its file or folder) into ``archive`` and return what was written.

    The archive appears only when complete (written to a temporary file, then renamed).
    """
    from ..spec import load_study

    layout = locate(study)
    # a bundle is only worth sending if its study file loads and its audit block is valid
    spec = load_study(layout.study_file)
    settings_from(layout.raw.get("audit"), str(layout.study_file), quantities=spec.quantities)
    inputs = _rendered_inputs(spec)
    # no run may change the study while it is read: hold the study's run lock (StudyBusyError
    # when a run is going)
    with RunLock(layout.study_dir / ".studyflow"):
        return _pack_locked(layout, archive, fields, compresslevel, inputs)


def _rendered_inputs(study: Any) -> set[str]:
    """The files rendering makes (``cases/<id>/<file>``), to label them in the manifest. Rendered
    in memory only; a study that does not render now is packed anyway (the audit will say why)."""
    from ..design import build_design
    from ..render import render_all

    try:
        rendered = render_all(study, build_design(study))
    except StudyflowError:
        return set()
    return {f"cases/{rc.case.id}/{rel}" for rc in rendered for rel in rc.files}


def _pack_locked(layout: StudyLayout, archive: str | os.PathLike | None, fields: bool,
                 compresslevel: int, inputs: set[str]) -> PackResult:
    members, skipped = select(layout, fields=fields, inputs=inputs)
    out = Path(archive) if archive is not None else layout.study_dir.parent / default_archive_name(layout)
    out = out.resolve()
    entries: list[FileEntry] = []
    # the archive itself may be written inside the study folder: never pack it into itself
    members = [m for m in members if m.source != out]
    for m in members:
        digest, size = _hash_file(m.source)
        entries.append(FileEntry(m.path, digest, size, m.role))

    commands, dates = _run_history(layout)
    environment = env.capture(_solver_commands(layout), commands, dates)
    env_bytes = (json.dumps(environment, indent=1, sort_keys=True) + "\n").encode("utf-8")
    entries.append(FileEntry(ENVIRONMENT_NAME, sha256_bytes(env_bytes), len(env_bytes), "environment"))

    template = None
    if layout.template_dir is not None:
        template = {"declared": layout.template_declared, "stored": f"{PAYLOAD}/{layout.template_rel()}",
                    "inside_study": layout.template_inside_study,
                    "absolute": os.path.isabs(str(layout.template_declared))}
    manifest = Manifest(
        study_name=layout.study_dir.name,
        study_dir=f"{PAYLOAD}/{layout.study_rel}".rstrip("/."),
        study_file=f"{PAYLOAD}/{layout.study_rel}/{layout.study_file.name}".replace("/./", "/"),
        template=template,
        created=environment["packed"],
        studyflow_version=studyflow.__version__,
        options={"fields": fields},
        files=entries,
        skipped=skipped,
    )
    manifest_bytes = manifest.dumps()
    mtime = _epoch(manifest.created)
    top = layout.study_dir.name + "-bundle"

    total = 0
    with atomic_output(out) as raw:
        with gzip.GzipFile(filename="", mode="wb", fileobj=raw, mtime=mtime, compresslevel=compresslevel) as gz, \
                tarfile.open(fileobj=gz, mode="w", format=tarfile.PAX_FORMAT) as tf:
            for name, data in ((MANIFEST_NAME, manifest_bytes), (ENVIRONMENT_NAME, env_bytes)):
                tf.addfile(_info(f"{top}/{name}", len(data), mtime), io.BytesIO(data))
            by_path = manifest.by_path()
            for m in members:
                entry = by_path[m.path]
                with open(m.source, "rb") as fh:
                    reader = _CheckedReader(fh)
                    executable = os.access(m.source, os.X_OK)
                    tf.addfile(_info(f"{top}/{m.path}", entry.size, mtime, executable), reader)
                    if reader.h.hexdigest() != entry.sha256:
                        raise PackError(f"{m.source}: changed while packing; pack again when no run is active")
                total += entry.size
    roles = {e.role for e in entries}
    warnings = []
    if "results" not in roles:
        warnings.append("no results table in the study: a reviewer can re-render but not compare a re-run; "
                        "collect the study before packing")
    if "uncertainty" not in roles:
        warnings.append("no uncertainty table in the study: assess it before packing")
    for path in _outside_files(layout):
        warnings.append(f"a step uses {path}, which lies outside the study and its templates and is not "
                        "in the bundle: a reviewer needs it to re-run")
    return PackResult(out, sha256_bytes(manifest_bytes), len(entries), total, skipped,
                      environment["solvers"], warnings)
