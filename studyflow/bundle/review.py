"""The reviewer's audit of a bundle: integrity, re-render, re-run, re-computed uncertainty, verdict.

Exit codes (``studyflow.errors``): ``EXIT_OK`` (0) when every check passed (notes such as a
changed solver version do not fail an audit by themselves), ``EXIT_AUDIT_FAILED`` (8) when a
file is missing, altered or unexpected, a case does not re-render byte for byte, a re-run
quantity is outside its tolerance or the uncertainty table does not re-compute, and
``EXIT_UNSAFE`` (9) when the archive is refused before anything is unpacked (raised as
``UnsafePathError``).
"""

from __future__ import annotations

import random
import shutil
import tempfile
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import studyflow

from ..errors import EXIT_AUDIT_FAILED, EXIT_OK, AuditError, StudyflowError
from ..fsutil import sha256_file
from . import environment as env
from .manifest import MANIFEST_NAME, Manifest, verify_tree
from .unpack import safe_extract

CAUTION = ("An audit checks that the bundle is intact and reproducible, not that its results are right: "
           "verification is not validation, results need review by a qualified engineer, and local "
           "codes and licensed practice govern any design use.")


@dataclass(frozen=True)
class RerunChoice:
    """Which cases to re-run: ``all``, ``sample`` (n cases drawn with a seed) or named ``cases``."""

    mode: str = "none"  # none | all | sample | cases
    n: int = 0
    seed: int = 0
    cases: tuple[str, ...] = ()

    def pick(self, available: list[str]) -> list[str]:
        ids = sorted(available)
        if self.mode == "all":
            return ids
        if self.mode == "sample":
            # random.Random(seed) gives the same draw on every platform for the same list
            return sorted(random.Random(self.seed).sample(ids, min(self.n, len(ids))))
        if self.mode == "cases":
            unknown = [c for c in self.cases if c not in set(ids)]
            if unknown:
                raise AuditError(f"--rerun-case: no case {unknown[0]!r} in this study "
                                 f"(cases: {', '.join(ids[:8])}{', ...' if len(ids) > 8 else ''})")
            return sorted(set(self.cases))
        return []

    def describe(self) -> str:
        return {"none": "no re-run asked", "all": "all cases",
                "sample": f"a sample of {self.n} (seed {self.seed})",
                "cases": "named cases"}[self.mode]


@dataclass
class Phase:
    name: str
    ran: bool = False
    ok: bool = True
    error: str | None = None
    detail: dict[str, Any] = field(default_factory=dict)

    def to_json(self) -> dict[str, Any]:
        return {"ran": self.ran, "ok": self.ok, "error": self.error, **self.detail}


@dataclass
class AuditReport:
    bundle: str
    root: str
    study: str = ""
    manifest_sha256: str = ""
    scratch: str | None = None  # kept scratch folder (re-rendered and re-run cases), if any
    phases: dict[str, Phase] = field(default_factory=dict)
    notes: list[dict[str, Any]] = field(default_factory=list)
    failures: list[str] = field(default_factory=list)

    @property
    def ok(self) -> bool:
        return not self.failures

    @property
    def exit_code(self) -> int:
        return EXIT_OK if self.ok else EXIT_AUDIT_FAILED

    def to_json(self) -> dict[str, Any]:
        return {
            "bundle": self.bundle, "root": self.root, "study": self.study,
            "manifest_sha256": self.manifest_sha256, "studyflow_version": studyflow.__version__,
            "scratch": self.scratch,
            "phases": {k: v.to_json() for k, v in self.phases.items()},
            "notes": self.notes, "failures": self.failures,
            "verdict": "pass" if self.ok else "fail", "exit_code": self.exit_code,
            "caution": CAUTION,
        }


# a phase that cannot be done is a finding of the audit, not a crash of it: a damaged or
# hand-edited bundle can make any reader fail
_PHASE_ERRORS = (StudyflowError, OSError, ValueError, KeyError, TypeError)


def _why(exc: BaseException) -> str:
    return str(exc) if isinstance(exc, StudyflowError) else f"{type(exc).__name__}: {exc}"


def find_root(folder: Path) -> Path:
    """The bundle root below ``folder``: itself, or its single sub-folder holding the manifest."""
    if (folder / MANIFEST_NAME).is_file():
        return folder
    candidates = [p for p in sorted(folder.iterdir()) if p.is_dir() and (p / MANIFEST_NAME).is_file()]
    if len(candidates) == 1:
        return candidates[0]
    if not candidates:
        raise AuditError(f"{folder}: no {MANIFEST_NAME} here or in a sub-folder; is this a studyflow bundle?")
    raise AuditError(f"{folder}: several bundles inside ({', '.join(p.name for p in candidates)}); give one")


def _integrity(root: Path, manifest: Manifest, report: AuditReport) -> None:
    ph = report.phases["integrity"] = Phase("integrity", ran=True)
    res = verify_tree(root, manifest)
    ph.ok = res.ok
    ph.detail = res.to_json()
    for p in res.missing:
        report.failures.append(f"missing: {p}")
    for a in res.altered:
        report.failures.append(f"altered: {a.path}")
    for p in res.unexpected:
        report.failures.append(f"unexpected: {p}")
    for p in res.unsafe:
        report.failures.append(f"not a plain file (link or special file): {p}")


def _environment(root: Path, shipped_env: dict[str, Any], report: AuditReport) -> None:
    ph = report.phases["environment"] = Phase("environment", ran=True)
    now: dict[str, env.SolverVersion] = {}
    for command in sorted(shipped_env.get("solvers") or {}):
        if "/" in command:
            # a program shipped inside the case folders is checked by its hash, not run here
            continue
        now[command] = env.probe_solver(command)
    notes = env.compare(shipped_env, now)
    ph.detail = {"packed": {"python": (shipped_env.get("python") or {}).get("version"),
                            "platform": (shipped_env.get("platform") or {}).get("platform"),
                            "packed": shipped_env.get("packed"),
                            "studyflow": shipped_env.get("studyflow_version"),
                            "solvers": {k: env.recorded_version(v)
                                        for k, v in (shipped_env.get("solvers") or {}).items()}},
                 "now": {k: v.to_json() for k, v in now.items()},
                 "command_lines": shipped_env.get("command_lines") or []}
    report.notes.extend(notes)


def audit(source: str | Path, *, into: str | Path | None = None, rerun: RerunChoice = RerunChoice(),
          scratch: str | Path | None = None, keep_scratch: bool = False, jobs: int = 1,
          engine: str = "workflow", manifest_sha256: str | None = None) -> AuditReport:
    """Audit a bundle archive (unpacked safely into ``into``) or an unpacked bundle folder.

    Raises ``UnsafePathError`` when the archive is refused (nothing is written then) and
    ``AuditError`` when the source is not a bundle at all; every other finding goes into the
    report, whose ``exit_code`` is the command's exit code. ``manifest_sha256``: the digest the
    packer printed, sent separately; a different manifest fails the audit.
    """
    from . import replay  # the re-render / re-run machinery needs the lower layers only on demand

    source = Path(source)
    if source.is_file():
        if into is not None:
            target = Path(into)
            safe_extract(source, target)
        else:
            target = Path(tempfile.mkdtemp(prefix="studyflow-audit-"))
            try:
                safe_extract(source, target)
            except BaseException:
                shutil.rmtree(target, ignore_errors=True)  # a refused archive leaves nothing behind
                raise
        folder = target
    elif source.is_dir():
        folder = source
    else:
        raise AuditError(f"{source}: no such archive or folder")
    root = find_root(folder).resolve()
    report = AuditReport(bundle=str(source), root=str(root))
    manifest = Manifest.load(root)
    report.study = manifest.study_name
    report.manifest_sha256 = sha256_file(root / MANIFEST_NAME)
    if manifest_sha256 is not None and manifest_sha256.strip().lower() != report.manifest_sha256:
        # the one check a forger who rewrote files and manifest together cannot pass
        report.failures.append(f"manifest digest {report.manifest_sha256} is not the expected "
                               f"{manifest_sha256.strip().lower()}: the manifest itself was changed")
    shipped_env = env.read_record(root)

    _integrity(root, manifest, report)
    _environment(root, shipped_env, report)

    if scratch is not None:
        s_abs, r_abs = Path(scratch).resolve(), root.resolve()
        if s_abs == r_abs or r_abs in s_abs.parents:
            raise AuditError(f"--scratch {scratch}: lies inside the bundle {root}; its files would "
                             "count as unexpected. Give a folder outside it")
    work = Path(scratch) if scratch is not None else Path(tempfile.mkdtemp(prefix="studyflow-audit-scratch-"))
    work.mkdir(parents=True, exist_ok=True)
    try:
        settings = None
        ph = report.phases["rerender"] = Phase("rerender")
        try:
            outcome = replay.rerender(root, manifest, work / "render")
            settings = outcome.settings
            ph.ran, ph.ok, ph.detail = True, outcome.ok, outcome.to_json()
            for p in outcome.differs:
                report.failures.append(f"re-rendered input differs from the shipped one: {p}")
            for p in outcome.not_shipped:
                report.failures.append(f"re-rendered input not in the bundle: {p}")
            for c in outcome.extra_cases:
                report.failures.append(f"shipped case not in the study's design: {c}")
            if outcome.notes:
                # one note for all: a limit override touches every case's step record alike
                report.notes.append({"what": "time limit override", "name": "step records",
                                     "now": f"{len(outcome.notes)} step records differ only in the time limit "
                                            f"(the study was run with a limit override), e.g. {outcome.notes[0]}"})
            case_ids = outcome.case_ids
        except _PHASE_ERRORS as exc:
            ph.ran, ph.ok, ph.error = True, False, _why(exc)
            report.failures.append(f"re-render failed: {_why(exc)}")
            case_ids = []

        ph = report.phases["rerun"] = Phase("rerun", detail={"how": rerun.describe()})
        if rerun.mode != "none":
            try:
                # "all" and samples draw from cases the shipped study ran; named cases are taken as asked
                ran = replay.shipped_cases_run(root, manifest)
                chosen = rerun.pick(case_ids if rerun.mode == "cases" else [c for c in case_ids if c in ran])
                outcome = replay.rerun(root, manifest, work / "rerun", chosen, settings, jobs=jobs,
                                       engine=engine)
                ph.ran, ph.ok = True, outcome.ok
                ph.detail.update(outcome.to_json())
                for c in outcome.checks:
                    if not c.ok:
                        report.failures.append(f"re-run {c.case} {c.quantity}: {c.reason}")
                for c, why in outcome.failed_cases.items():
                    report.failures.append(f"re-run of case {c} failed: {why}")
                report.notes.extend(outcome.notes)
            except _PHASE_ERRORS as exc:
                ph.ran, ph.ok, ph.error = True, False, _why(exc)
                report.failures.append(f"re-run failed: {_why(exc)}")

        ph = report.phases["uncertainty"] = Phase("uncertainty")
        try:
            outcome = replay.recompute_uncertainty(root, manifest, work / "render", settings)
            ph.ran = outcome.ran
            ph.ok = outcome.ok
            ph.detail = outcome.to_json()
            if outcome.ran and not outcome.ok:
                report.failures.append(f"uncertainty table does not re-compute: {outcome.summary}")
            elif not outcome.ran:
                report.notes.append({"what": "uncertainty", "name": "uncertainty table", "packed": None,
                                     "now": outcome.summary})
        except _PHASE_ERRORS as exc:
            ph.ran, ph.ok, ph.error = True, False, _why(exc)
            report.failures.append(f"uncertainty table re-computation failed: {_why(exc)}")
    finally:
        if not keep_scratch and scratch is None:
            shutil.rmtree(work, ignore_errors=True)
        else:
            report.scratch = str(work)
    return report
