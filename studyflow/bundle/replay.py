"""Re-making a bundle's study from its own study file and templates: re-render, re-run, re-assess.

Nothing here writes into the bundle. Re-rendering happens in memory; re-running works on a
scratch copy of the study file, its templates and any other study input (never the shipped
case folders, whose outputs are what the re-run is compared with).
"""

from __future__ import annotations

import json
import re
import shutil
from dataclasses import dataclass, field
from pathlib import Path, PurePosixPath
from typing import Any

import yaml

from ..errors import AuditError
from ..fsutil import confined
from .manifest import Manifest
from .tolerances import AuditSettings, settings_from

# study sub-folders that hold outputs, never inputs of a re-run
OUTPUT_DIRS = ("cases", "results", "report", ".studyflow", ".snakemake")
STATE = ".studyflow"


def _study_paths(root: Path, manifest: Manifest) -> tuple[Path, Path]:
    # both must really lie in the bundle: an unpacked folder could have been given links
    study_dir = confined(root, manifest.study_dir, "the manifest's study_dir")
    study_file = confined(root, manifest.study_file, "the manifest's study_file")
    if (root / manifest.study_file).is_symlink() or not study_file.is_file():
        raise AuditError(f"{manifest.study_file}: the bundle's study file is missing")
    return study_dir, study_file


def audit_settings(study_file: Path) -> AuditSettings:
    """The study's ``audit:`` tolerances (defaults when the block is absent)."""
    from ..spec.yamlsource import load_yaml_text  # the study loader's number rules

    try:
        raw = load_yaml_text(study_file.read_text(encoding="utf-8")) or {}
    except (OSError, UnicodeDecodeError, yaml.YAMLError) as exc:
        # Never fall back to default tolerances: the reviewer would audit against numbers the
        # study did not ask for.
        raise AuditError(f"{study_file}: cannot read the study's audit tolerances: "
                         f"{getattr(exc, 'strerror', None) or exc}") from None
    return settings_from(raw.get("audit") if isinstance(raw, dict) else None, str(study_file))


def copy_inputs(root: Path, manifest: Manifest, scratch: Path) -> Path:
    """Copy the study file, templates and other study inputs to ``scratch`` in the bundle's
    layout; return the scratch study file. A template given as an absolute path is pointed at
    its stored copy in the scratch study file (the only edit ever made to a study file)."""
    if scratch.exists() and any(scratch.iterdir()):
        raise AuditError(f"scratch folder {scratch} is not empty")
    root = root.resolve()  # study_dir comes back resolved; the walk below must match it
    study_dir, _ = _study_paths(root, manifest)
    payload_root = root / "payload"
    for src in sorted(payload_root.rglob("*")):
        if src.is_symlink() or not src.is_file():
            continue
        rel = src.relative_to(root)
        try:
            inner = src.relative_to(study_dir)
            if inner.parts and inner.parts[0] in OUTPUT_DIRS:
                continue
        except ValueError:
            pass
        dst = scratch / rel
        dst.parent.mkdir(parents=True, exist_ok=True)
        shutil.copy2(src, dst)
    new_file = scratch / manifest.study_file
    tpl = manifest.template or {}
    if tpl.get("absolute"):
        stored = (scratch / tpl["stored"]).resolve()
        text = new_file.read_text(encoding="utf-8")
        text, n = re.subn(r"(?m)^template\s*:.*$", "template: " + json.dumps(str(stored)), text, count=1)
        if n != 1:
            raise AuditError(f"{manifest.study_file}: cannot point the study at its stored template")
        new_file.write_text(text, encoding="utf-8")
    return new_file


@dataclass
class RerenderOutcome:
    cases: int = 0
    files: int = 0
    case_ids: list[str] = field(default_factory=list)
    differs: list[str] = field(default_factory=list)
    not_shipped: list[str] = field(default_factory=list)
    extra_cases: list[str] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    settings: AuditSettings | None = None

    @property
    def ok(self) -> bool:
        return not (self.differs or self.not_shipped or self.extra_cases)

    def to_json(self) -> dict[str, Any]:
        return {"cases": self.cases, "files": self.files, "differs": self.differs,
                "not_shipped": self.not_shipped, "extra_cases": self.extra_cases, "notes": self.notes}


def _load(study_file: Path):
    from ..spec import load_study

    return load_study(study_file)


def _step_json_equal_but_limit(a: bytes, b: bytes) -> bool:
    """True when two step records differ only in the time limit (a ``run --timeout`` override)."""
    try:
        ja, jb = json.loads(a), json.loads(b)
    except ValueError:
        return False
    if not (isinstance(ja, dict) and isinstance(jb, dict)):
        return False
    ja.pop("time_limit_s", None)
    jb.pop("time_limit_s", None)
    return ja == jb


def rerender(root: Path, manifest: Manifest, scratch: Path) -> RerenderOutcome:
    """Render every case of the bundle's study in memory and compare each file with the shipped one."""
    from ..design import build_design
    from ..render import render_all

    _, study_file = _study_paths(root, manifest)
    if (manifest.template or {}).get("absolute"):
        study_file = copy_inputs(root, manifest, scratch)
    out = RerenderOutcome(settings=audit_settings(study_file))
    study = _load(study_file)
    design = build_design(study)
    rendered = render_all(study, design)
    cases_prefix = PurePosixPath(manifest.study_dir) / "cases"
    for rc in rendered:
        cid = rc.case.id
        out.case_ids.append(cid)
        expected: dict[str, bytes] = dict(rc.files)
        expected[f"{STATE}/case.json"] = rc.case_json
        for doc, data in zip(rc.steps, rc.step_bytes()):
            expected[f"{STATE}/{doc['step']}.step.json"] = data
        for rel, data in sorted(expected.items()):
            out.files += 1
            bundle_path = (cases_prefix / cid / rel).as_posix()
            shipped = root / bundle_path
            if not shipped.is_file() or shipped.is_symlink():
                out.not_shipped.append(bundle_path)
                continue
            have = shipped.read_bytes()
            if have != data:
                if rel.endswith(".step.json") and _step_json_equal_but_limit(have, data):
                    out.notes.append(f"{bundle_path}: time limit differs (the study was run with a limit override)")
                    continue
                out.differs.append(bundle_path)
    out.cases = len(rendered)
    designed = set(out.case_ids)
    shipped_cases = root / cases_prefix
    if shipped_cases.is_dir():
        out.extra_cases = sorted(p.name for p in shipped_cases.iterdir()
                                 if p.is_dir() and p.name not in designed and (p / STATE / "case.json").is_file())
    return out


@dataclass
class UncertaintyOutcome:
    ran: bool = False
    ok: bool = True
    summary: str = ""
    table: str | None = None
    comparison: dict[str, Any] | None = None

    def to_json(self) -> dict[str, Any]:
        return {"summary": self.summary, "table": self.table, "comparison": self.comparison}


UNCERTAINTY_KEYS = ["point", "quantity", "coord"]


def _shipped_table(study_dir: Path, stem: str):
    """A shipped table of the study's results folder (None when not shipped), read by the
    collection layer's reader, so a shipped table is read exactly as ``studyflow`` reads its own
    (imported here: the bundle verbs that never read a table should not pay for pandas)."""
    from ..collect.store import read_table

    return read_table(study_dir, stem, required=False)


def recompute_uncertainty(root: Path, manifest: Manifest, scratch: Path,
                          settings: AuditSettings | None) -> UncertaintyOutcome:
    """Re-assess the shipped results table and compare with the shipped uncertainty table."""
    from .compare import compare_tables

    study_dir, study_file = _study_paths(root, manifest)
    results_dir = study_dir / "results"
    shipped = _shipped_table(study_dir, "uncertainty")
    if shipped is None:
        return UncertaintyOutcome(False, True, "no uncertainty table in the bundle")
    from ..analysis import assess
    from ..collect import read_results
    from ..collect.store import table_file

    shipped_path = table_file(study_dir, "uncertainty")

    if (manifest.template or {}).get("absolute") and (scratch / manifest.study_file).is_file():
        study_file = scratch / manifest.study_file
    study = _load(study_file)
    settings = settings or audit_settings(study_file)
    tables = read_results(study_dir)
    remade = assess(tables.results, tables.histories, study=study, source=str(results_dir / "results"))
    rtol, atol = settings.for_uncertainty()
    cmp = compare_tables(shipped, remade, UNCERTAINTY_KEYS, lambda row: (rtol, atol))
    rel = shipped_path.relative_to(root).as_posix()
    if cmp.ok:
        summary = f"re-computed from the shipped results: {cmp.rows_shipped} rows match ({rel})"
    else:
        summary = f"{len(cmp.differences)} differences against {rel} (first: {cmp.differences[0]})"
    return UncertaintyOutcome(True, cmp.ok, summary, rel, cmp.to_json())


@dataclass
class RerunOutcome:
    cases: list[str] = field(default_factory=list)
    checks: list[Any] = field(default_factory=list)  # compare.QuantityCheck
    failed_cases: dict[str, str] = field(default_factory=dict)
    notes: list[dict[str, Any]] = field(default_factory=list)
    scratch: str = ""

    @property
    def ok(self) -> bool:
        return not self.failed_cases and all(c.ok for c in self.checks)

    def to_json(self) -> dict[str, Any]:
        return {"cases": self.cases, "failed_cases": self.failed_cases, "scratch": self.scratch,
                "checks": [c.to_json() for c in self.checks]}


def _run_case(case_dir: Path, steps: list[str], timeout_s: float | None) -> str | None:
    """Run a case's steps in order with the workflow's own step runner, each in a fresh Python
    process exactly as a workflow job would; return the failure reason or None."""
    import subprocess
    import sys

    from ..workflow import signature as sig

    for step in steps:
        try:
            proc = subprocess.run([sys.executable, "-m", "studyflow.workflow.runstep", str(case_dir), step],
                                  capture_output=True, timeout=timeout_s, stdin=subprocess.DEVNULL, check=False)
        except subprocess.TimeoutExpired:
            return f"step {step}: no end within {timeout_s:g} s"
        if proc.returncode != 0:
            status = sig.read_json(sig.status_path(str(case_dir), step)) or {}
            why = status.get("reason") or proc.stderr.decode("utf-8", "replace").strip()[-300:]
            return f"step {step}: {why or f'exit code {proc.returncode}'}"
    return None


ENGINES = ("workflow", "direct")


def shipped_cases_run(root: Path, manifest: Manifest) -> set[str]:
    """Cases the shipped results table has as done or failed (pending ones have nothing to compare)."""
    study_dir, _ = _study_paths(root, manifest)
    table = _shipped_table(study_dir, "results")
    if table is None or "status" not in table:
        return set()
    return set(table.loc[table["status"].astype(str) != "pending", "case"].astype(str))


def _run_with_workflow(study: Any, cases: list[str], jobs: int) -> dict[str, str | None]:
    """Run exactly ``cases`` through the workflow engine (Snakemake), as ``studyflow run`` would."""
    from ..workflow.driver import EngineOptions, run_engine
    from ..workflow.state import DONE, case_state

    if cases:
        run_engine(study, cases, EngineOptions(cores=jobs, progress=False))
    steps = study.step_names()
    out: dict[str, str | None] = {}
    for c in cases:
        state = case_state(study.cases_dir / c, steps)
        out[c] = None if state.status == DONE else (state.reason or state.status)
    return out


def rerun(root: Path, manifest: Manifest, scratch: Path, cases: list[str], settings: AuditSettings | None,
          jobs: int = 1, timeout_s: float | None = None, engine: str = "workflow") -> RerunOutcome:
    """Re-run ``cases`` from a fresh render in ``scratch`` and compare every collected quantity
    with the shipped results table, within the study's audit tolerances.

    ``engine="workflow"`` runs them through the workflow engine like ``studyflow run``;
    ``"direct"`` runs each case's steps in turn with the same step runner, without the engine
    (quicker for a handful of cases)."""
    if engine not in ENGINES:
        raise AuditError(f"re-run engine {engine!r} is not one of {', '.join(ENGINES)}")
    from concurrent.futures import ThreadPoolExecutor

    from ..collect import collect_study
    from ..design import build_design
    from ..render import render_study
    from .compare import compare_histories, compare_results

    study_dir, _ = _study_paths(root, manifest)
    shipped_results = _shipped_table(study_dir, "results")
    if shipped_results is None:
        raise AuditError(f"{manifest.study_dir}/results: the bundle has no results table to compare a re-run with")
    shipped_hist = _shipped_table(study_dir, "histories")

    study_file = copy_inputs(root, manifest, scratch)
    settings = settings or audit_settings(study_file)
    study = _load(study_file)
    design = build_design(study)
    render_study(study, design)
    out = RerunOutcome(cases=list(cases), scratch=str(scratch))
    steps = study.step_names()
    if engine == "workflow":
        reasons = _run_with_workflow(study, cases, max(1, jobs))
    else:
        with ThreadPoolExecutor(max_workers=max(1, jobs)) as pool:
            reasons = dict(zip(cases, pool.map(lambda c: _run_case(study.cases_dir / c, steps, timeout_s), cases)))

    # programs shipped with the study (a path, not a name on PATH) are asked for their version here
    from . import environment as env

    shipped_env = env.read_record(root)
    for command, then in sorted((shipped_env.get("solvers") or {}).items()):
        if "/" in command and cases:
            now = env.probe_solver(command, cwd=str(study.cases_dir / cases[0]))
            before, after = env.recorded_version(then), now.shown
            if before != after:
                out.notes.append({"what": "solver version", "name": command, "packed": before, "now": after,
                                  "error_now": now.error})

    tables = collect_study(study, cases=cases, write=False)
    remade = tables.results
    comparable = []
    for c in cases:
        shipped_status = set(shipped_results.loc[shipped_results["case"].astype(str) == c, "status"].astype(str))
        if shipped_status <= {"pending"}:
            out.notes.append({"what": "not compared", "name": c,
                              "now": f"case {c} was not run in the shipped study; its re-run has nothing to "
                                     f"be compared with ({'done' if reasons[c] is None else reasons[c]})"})
            continue
        comparable.append(c)
        if reasons[c] is not None and shipped_status != {"failed"}:
            out.failed_cases[c] = reasons[c]
    out.checks = compare_results(shipped_results, remade, comparable, settings)
    if shipped_hist is not None and not shipped_hist.empty:
        out.checks += compare_histories(shipped_hist, tables.histories, comparable, settings)
    out.checks.sort(key=lambda c: (c.case, c.quantity, c.kind))
    return out
