"""What the packaged Snakemake rules ask of the library (``rules/studyflow.smk`` stays declarative).

One rule per step, wildcard ``case``; its output is the step's done marker, its inputs the
step's ``.step.json``, the reads that come from the template, and the upstream step's done marker
(reads written by an earlier step are covered by that marker). The shell command calls the step
runner with an argument list built here and quoted, never with study values pasted in.
"""

from __future__ import annotations

import os
import shlex
import sys
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any, Callable

if TYPE_CHECKING:
    from ..spec.model import StepSpec, Study

# Kept here rather than imported from render: the engine imports this module at start-up, and
# the rendering stack (jinja2, the design) is not needed when the driver already rendered.
STATE = ".studyflow"

RULE_PREFIX = "sf_"
DEFAULT_RUNNER = "studyflow.workflow.runstep"
RUNSTEP_FILE = Path(__file__).resolve().with_name("runstep.py")
RUNBATCH_FILE = Path(__file__).resolve().with_name("runbatch.py")
BATCH_GROUP = "sf_batch"
# The rule of a local batch of cases (runbatch.py). Step names start with a letter, so no
# step's rule ("sf_" + name) can be called this.
LOCAL_BATCH_RULE = "sf__cases"
BATCHES = "batches"  # folder of the batch files, under the study's .studyflow


def rule_name(step: StepSpec | str) -> str:
    """Snakemake rule name of a step (prefixed so no step name clashes with a Snakemake keyword)."""
    return RULE_PREFIX + (step if isinstance(step, str) else step.name)


def done_path(prefix: str, case: str, step: str) -> str:
    return f"{prefix}cases/{case}/{STATE}/{step}.done"


def batch_path(prefix: str, batch: str, suffix: str = ".done") -> str:
    return f"{prefix}{STATE}/{BATCHES}/{batch}{suffix}"


def group_for(study: Study, step: StepSpec) -> str | None:
    """Hook for cluster batching: the Snakemake group of a step's jobs, or None for no group.

    Every step of every case joins one group when ``cluster.batch`` is set; each case is then one
    connected component of that group, and ``--group-components sf_batch=<batch>`` (see
    ``group_components``) packs ``batch`` cases into one scheduler job. Snakemake ignores groups
    in local runs. ``studyflow.cluster`` may refine this.
    """
    return BATCH_GROUP if study.cluster is not None and study.cluster.batch else None


def group_components(study: Study) -> list[str]:
    """Snakemake options that size the batches of ``group_for`` (empty when not batching)."""
    if study.cluster is None or not study.cluster.batch:
        return []
    return ["--group-components", f"{BATCH_GROUP}={study.cluster.batch}"]


def package_parent() -> str:
    """The folder that holds the ``studyflow`` package (put on PYTHONPATH for the step runner)."""
    return str(Path(__file__).resolve().parents[2])


def ensure_importable() -> None:
    parent = package_parent()
    current = os.environ.get("PYTHONPATH", "")
    if parent not in current.split(os.pathsep):
        os.environ["PYTHONPATH"] = parent + (os.pathsep + current if current else "")


def rule_spec(study: Study) -> dict[str, Any]:
    """Everything the rules need, as plain JSON-able data (the driver hands it to the engine in
    ``.studyflow/rules.json`` so the engine need not load the study file again)."""
    root = study.template_dir
    template_rels = {p.relative_to(root).as_posix() for p in root.rglob("*") if p.is_file()}
    steps = []
    for i, step in enumerate(study.steps):
        res: dict[str, int] = {}
        mem = step.memory_mb or study.resources.memory_mb
        if mem:
            res["mem_mb"] = int(mem)
        limit = study.time_limit_s(step)
        if limit:
            res["runtime"] = max(1, int(round(limit / 60.0)))
        steps.append({"name": step.name, "previous": study.steps[i - 1].name if i else None,
                      "template_reads": [r for r in step.reads if r in template_rels],
                      "threads": step.cores or study.resources.cores, "resources": res,
                      "group": group_for(study, step)})
    return {"study": str(study.file), "root": str(study.root), "retries": study.retries, "steps": steps}


@dataclass(frozen=True)
class RuleStep:
    name: str
    previous: str | None
    template_reads: tuple[str, ...]
    threads: int
    resources: dict[str, int] = field(hash=False)
    group: str | None = None


@dataclass
class RuleSet:
    steps: list[RuleStep]
    prefix: str  # path from Snakemake's working directory to the study folder ("" or "studies/x/")
    retries: int
    all_targets: list[str] = field(default_factory=list)
    # The module each job runs; cluster batches use studyflow.cluster.batchstep (config step_runner).
    runner: str = "studyflow.workflow.runstep"  # DEFAULT_RUNNER

    def rule_name(self, step: RuleStep) -> str:
        return rule_name(step.name)

    def output(self, step: RuleStep) -> str:
        return done_path(self.prefix, "{case}", step.name)

    def inputs(self, step: RuleStep) -> Callable[[Any], list[str]]:
        prefix, name, previous, reads = self.prefix, step.name, step.previous, step.template_reads

        def fn(wildcards: Any) -> list[str]:
            base = f"{prefix}cases/{wildcards.case}/"
            out = [f"{base}{STATE}/{name}.step.json"] + [base + r for r in reads]
            if previous:
                out.append(f"{base}{STATE}/{previous}.done")
            return out

        return fn

    def threads(self, step: RuleStep) -> int:
        return step.threads

    def resources(self, step: RuleStep) -> dict[str, int]:
        return dict(step.resources)

    def group(self, step: RuleStep) -> str | None:
        return step.group

    # The local batch rule (one job runs the pending steps of many cases; see runbatch.py).
    @property
    def batch_input(self) -> str:
        return batch_path(self.prefix, "{batch}", ".json")

    @property
    def batch_output(self) -> str:
        return batch_path(self.prefix, "{batch}")

    @property
    def batch_threads(self) -> int:
        return max(s.threads for s in self.steps)

    @property
    def batch_resources(self) -> dict[str, int]:
        mem = [s.resources["mem_mb"] for s in self.steps if "mem_mb" in s.resources]
        return {"mem_mb": max(mem)} if mem else {}

    @property
    def batch_command(self) -> str:
        return f"{_quote(sys.executable)} -S {_quote(str(RUNBATCH_FILE))} {{input:q}}"

    @property
    def shell_command(self) -> str:
        """The one shell line of every rule. Snakemake fills ``{wildcards.case}`` and
        ``{params.step}``; case ids are filesystem-safe ([A-Za-z0-9._-]) and step names are
        identifiers, so with the quoted prefix each stays one argument. ``-S``: the runner needs
        only the standard library, and skipping site start-up saves time on every job."""
        q = _quote
        case_dir = q(f"{self.prefix}cases/") + "{wildcards.case}"
        if self.runner == DEFAULT_RUNNER:
            # By file path, not -m: skips runpy and the package imports on every job (the
            # runner then imports its one helper, signature.py, from its own folder).
            return f"{q(sys.executable)} -S {q(str(RUNSTEP_FILE))} {case_dir} {{params.step}}"
        return f"{q(sys.executable)} -S -m {self.runner} {case_dir} {{params.step}}"


def _quote(text: str) -> str:
    """One shell word, with Snakemake's format braces escaped."""
    return shlex.quote(text).replace("{", "{{").replace("}", "}}")


def setup(config: dict[str, Any], workdir: str | None = None) -> RuleSet:
    """The rules for the study named by ``config['study']``; renders it unless the driver did.

    ``config['driver']`` set: the studyflow run command rendered the cases and passes explicit
    targets, so neither rendering nor the list of all targets is needed, and with
    ``config['rules']`` (the driver's ``.studyflow/rules.json``) the study file is not even read
    again: that keeps the engine's start-up short at 10,000 cases. Otherwise
    (``snakemake --config study=studies/NAME``) the study is rendered here and rule ``all`` asks
    for every case's last step.
    """
    import json

    if "study" not in config:
        raise SystemExit("studyflow: give the study with --config study=studies/NAME")
    ensure_importable()
    study = None
    if config.get("driver") and config.get("rules"):
        with open(config["rules"], encoding="utf-8") as fh:
            spec = json.load(fh)
    else:
        from ..spec.loader import load_study

        study = load_study(config["study"])
        spec = rule_spec(study)
    cwd = Path(workdir or os.getcwd()).resolve()
    rel = os.path.relpath(spec["root"], cwd)
    prefix = "" if rel == "." else rel.rstrip("/") + "/"
    retries = int(config.get("retries", spec["retries"]))
    steps = [RuleStep(s["name"], s["previous"], tuple(s["template_reads"]), int(s["threads"]),
                      dict(s["resources"]), s.get("group")) for s in spec["steps"]]
    rs = RuleSet(steps, prefix, retries)
    runner = str(config.get("step_runner") or rs.runner)
    if not runner.startswith("studyflow.") or not runner.replace(".", "").replace("_", "").isalnum():
        raise SystemExit(f"studyflow: config step_runner must be a studyflow module (got {runner!r})")
    rs.runner = runner
    if not config.get("driver"):
        from ..design.cases import build_design
        from ..render.cases import render_study

        assert study is not None
        design = build_design(study)
        result = render_study(study, design)
        if result.removed:
            sys.stderr.write(f"studyflow: {len(result.removed)} case folder(s) no longer in the study, "
                             f"kept: {', '.join(result.removed[:5])}{' ...' if len(result.removed) > 5 else ''}\n")
        last = study.steps[-1].name
        rs.all_targets = [done_path(prefix, c.id, last) for c in design.cases]
    return rs
