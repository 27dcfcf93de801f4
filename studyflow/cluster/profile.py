"""The Snakemake profile a study carries for cluster runs: ``<study>/profiles/slurm/config.yaml``.

It is written from ``study.yaml`` (the ``cluster:`` and ``resources:`` blocks and each step's
``cores``/``memory_mb``/``time_min``) before every cluster run, so the two never disagree; edit
``study.yaml``, not the profile. The file stays in the study folder so that a reviewer sees how
the cases were submitted, and so that ``snakemake --profile profiles/slurm`` works by hand.

Resources of the study map to the plugin's resources per step rule:

=====================  =====================================  =========================
study.yaml             Snakemake resource                     sbatch flag
=====================  =====================================  =========================
cores                  threads, ``cpus_per_task``             ``--cpus-per-task``
memory_mb              ``mem_mb``                             ``--mem``
time_min               ``runtime`` (minutes, with a margin)   ``-t``
cluster.partition      ``slurm_partition``                    ``-p``
cluster.account        ``slurm_account``                      ``-A``
cluster.sbatch         ``slurm_extra``                        as given
=====================  =====================================  =========================
"""

from __future__ import annotations

import math
import shlex
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import yaml

from ..fsutil import write_if_changed
from ..spec.model import StepSpec, Study
from ..workflow.rules_support import BATCH_GROUP, rule_name
from .preflight import SchedulerInfo
from .settings import ClusterSettings

PROFILE_FILE = "config.yaml"
BATCH_RUNNER = "studyflow.cluster.batchstep"
LATENCY_WAIT_S = 30  # shared file systems of clusters can show a finished job's files late
HEADER = (
    "# Snakemake profile for running this study on {executor}; written by studyflow from study.yaml\n"
    "# before every cluster run (edit study.yaml, not this file). By hand, from the study folder:\n"
    "#   snakemake --snakefile <studyflow>/workflow/rules/studyflow.smk --profile profiles/{executor} \\\n"
    "#     --config study=study.yaml driver=1 {step_runner} <targets>\n"
)


@dataclass(frozen=True)
class ClusterRun:
    """What the driver needs for a cluster run: the profile and the engine arguments and config."""

    profile_dir: Path
    args: tuple[str, ...]
    config: tuple[str, ...]
    settings: ClusterSettings
    scheduler: SchedulerInfo | None
    content: dict[str, Any] = field(default_factory=dict)


def runtime_min(limit_s: float | None) -> int | None:
    """The scheduler wall time of one step: its own limit plus room for the job's start-up.

    The step runner stops the solver at its limit and records why; the scheduler's limit must
    come later, or the scheduler kills the job first and the case's own reason is lost.
    """
    if not limit_s:
        return None
    return int(math.ceil(limit_s * 1.1 / 60.0)) + 1


def step_resources(study: Study, step: StepSpec, settings: ClusterSettings) -> dict[str, Any]:
    cores = step.cores or study.resources.cores
    out: dict[str, Any] = {"cpus_per_task": int(cores)}
    mem = step.memory_mb or study.resources.memory_mb
    if mem:
        out["mem_mb"] = int(mem)
    minutes = runtime_min(study.time_limit_s(step))
    if minutes:
        out["runtime"] = minutes
    if settings.partition:
        out["slurm_partition"] = settings.partition
    if settings.account:
        out["slurm_account"] = settings.account
    if settings.sbatch:
        # Quoted so Snakemake keeps it one string resource instead of evaluating it.
        out["slurm_extra"] = repr(settings.sbatch)
    return out


def batch_cores(study: Study) -> int:
    """Cores of one batch job: the largest step's. Snakemake lays the cases of a group out in
    layers that fit these cores, so a batch runs its cases one after another and asks the
    scheduler for one case's cores, the largest memory and the summed wall time."""
    return max(int(s.cores or study.resources.cores) for s in study.steps)


def profile_content(study: Study, settings: ClusterSettings, scheduler: SchedulerInfo | None) -> dict[str, Any]:
    content: dict[str, Any] = {
        "executor": settings.executor,
        "jobs": settings.jobs,
        "cores": batch_cores(study),
        # Other batches go on after a failure; the outputs of a failed batch job are kept, since
        # the step runner writes a done marker only for a step that succeeded.
        "keep-going": True,
        "keep-incomplete": True,
        "latency-wait": LATENCY_WAIT_S,
    }
    if settings.batch:
        content["group-components"] = {BATCH_GROUP: settings.batch}
    status = settings.status_command or (scheduler.status_command if scheduler else None)
    if status:
        content["slurm-status-command"] = status
    content["slurm-init-seconds-before-status-checks"] = settings.first_check_s
    if not settings.account:
        content["slurm-no-account"] = True
    if settings.qos:
        content["slurm-qos"] = settings.qos
    content["set-threads"] = {rule_name(s): int(s.cores or study.resources.cores) for s in study.steps}
    content["set-resources"] = {rule_name(s): step_resources(study, s, settings) for s in study.steps}
    content.update(settings.options)
    return content


def profile_dir(study: Study, settings: ClusterSettings) -> Path:
    return study.root / "profiles" / settings.executor


def write_profile(study: Study, settings: ClusterSettings,
                  scheduler: SchedulerInfo | None = None) -> ClusterRun:
    """Write the study's profile (only when its bytes change) and return the run's engine arguments.

    ``args`` go after the driver's own options (later options win, so the profile's cores and
    latency wait are not overridden by the local defaults); ``config`` adds
    ``step_runner=studyflow.cluster.batchstep`` when cases are batched, so one failed case does not
    stop the rest of its batch.
    """
    content = profile_content(study, settings, scheduler)
    folder = profile_dir(study, settings)
    config = (f"step_runner={BATCH_RUNNER}",) if settings.batch else ()
    text = HEADER.format(executor=settings.executor, step_runner=" ".join(config))
    text += yaml.safe_dump(content, sort_keys=False, default_flow_style=False)
    write_if_changed(folder / PROFILE_FILE, text.encode("utf-8"))
    args = ("--profile", str(folder), "--cores", str(content["cores"]),
            "--latency-wait", str(content["latency-wait"]))
    return ClusterRun(folder, args, config, settings, scheduler, content)


def job_requests(study: Study, settings: ClusterSettings) -> list[list[str]]:
    """The sbatch resource flags of the jobs a run will submit (one per step, or one batch).

    A batch asks for its largest step's cores and memory and the sum of its cases' wall times
    (Snakemake's layering of a group, see ``batch_cores``).
    """
    per_step = [step_resources(study, s, settings) for s in study.steps]

    def flags(cpus: int, mem: int | None, minutes: int | None) -> list[str]:
        out = ["--cpus-per-task", str(cpus)]
        if mem:
            out += ["--mem", str(mem)]
        if minutes:
            out += ["-t", str(minutes)]
        if settings.partition:
            out += ["-p", settings.partition.split(",")[0]]
        if settings.account:
            out += ["-A", settings.account]
        if settings.qos:
            out += [f"--qos={settings.qos}"]
        if settings.sbatch:
            out += shlex.split(settings.sbatch)
        return out

    if settings.batch:
        mems = [r["mem_mb"] for r in per_step if "mem_mb" in r]
        times = [r.get("runtime") for r in per_step]
        total = settings.batch * sum(t for t in times if t) if any(times) else None
        return [flags(batch_cores(study), max(mems) if mems else None, total)]
    return [flags(r["cpus_per_task"], r.get("mem_mb"), r.get("runtime")) for r in per_step]
