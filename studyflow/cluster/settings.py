"""The study's ``cluster:`` block, checked: which scheduler, how cases are batched, where jobs go.

``spec`` only checks ``cluster.batch``; the other keys are checked here, so a study that never
runs on a cluster never needs this module. Every problem names the study file, the key path and
the value, all at once.

```yaml
cluster:
  batch: 20               # cases per scheduler job (Snakemake job group); 1 = one job per case
  partition: short        # SLURM partition (sbatch -p); omitted: the cluster's default
  account: proj123        # SLURM account (sbatch -A); omitted: none
  jobs: 100               # scheduler jobs queued or running at once
  status_command: squeue  # squeue or sacct; omitted: sacct when accounting is on, else squeue
  first_check_s: 40       # seconds before the first status poll of a job
  qos: normal             # sbatch --qos; leave out for the default
  sbatch: "--exclusive"   # further sbatch flags for every job (not those studyflow sets)
  options: {}             # further Snakemake profile keys, written into the profile as given
```
"""

from __future__ import annotations

import re
from typing import Any, Literal

from pydantic import BaseModel, ConfigDict, Field, ValidationError, field_validator

from ..errors import Problem, StudySpecError
from ..spec.model import Study

EXECUTORS = ("slurm",)

# Profile keys studyflow sets itself; letting ``options`` override them would break batching,
# failure reporting or the targets the plan chose.
RESERVED_OPTIONS = frozenset({
    "executor", "jobs", "cores", "group-components", "groups", "keep-going", "keep-incomplete",
    "config", "configfile", "configfiles", "snakefile", "directory", "forceall", "forcerun", "until",
    "omit-from", "set-resources", "set-threads", "target-jobs", "profile",
})


# sbatch flags snakemake-executor-plugin-slurm 2.8.0 manages itself (validation.py,
# get_forbidden_slurm_options); a copy, so the check works without the plugin installed.
SBATCH_SET_BY_PLUGIN = {
    r"--job-name[=\s]|(^|\s)-J": "job name", r"--output[=\s]|(^|\s)-o\s": "output file",
    r"--error[=\s]|(^|\s)-e\s": "error file", r"--parsable": "parsable output",
    r"--export[=\s]": "environment export", r"--comment[=\s]": "job comment",
    r"--workdir[=\s]|--chdir[=\s]|(^|\s)-D\s": "working directory",
    r"--account[=\s]|(^|\s)-A\s": "account (use cluster.account)",
    r"--partition[=\s]|(^|\s)-p\s": "partition (use cluster.partition)",
    r"--mem[=\s]|--mem-per-cpu[=\s]": "memory (use memory_mb)",
    r"--ntasks[=\s]|(^|\s)-n\s|--ntasks-per-gpu[=\s]": "number of tasks",
    r"--cpus-per-task[=\s]|(^|\s)-c\s|--cpus-per-gpu[=\s]": "CPUs per task (use cores)",
    r"--time[=\s]|(^|\s)-t\s": "time limit (use time_min)", r"--constraint[=\s]|(^|\s)-C\s": "node constraints",
    r"--qos[=\s]": "quality of service (use cluster.qos)", r"--nodes[=\s]|(^|\s)-N\s": "number of nodes",
    r"--clusters[=\s]": "cluster", r"--gres[=\s]|--gpus[=\s]": "GPUs",
}


class ClusterSettings(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)

    executor: Literal["slurm"] = "slurm"
    batch: int | None = Field(None, ge=1, le=100_000)
    partition: str | None = Field(None, min_length=1, pattern=r"^[A-Za-z0-9_.,-]+$")
    account: str | None = Field(None, min_length=1, pattern=r"^[A-Za-z0-9_.,-]+$")
    qos: str | None = Field(None, min_length=1, pattern=r"^[A-Za-z0-9_.,-]+$")
    jobs: int = Field(100, ge=1, le=100_000)
    status_command: Literal["squeue", "sacct"] | None = None
    first_check_s: int = Field(40, ge=1, le=3600)
    sbatch: str | None = None
    options: dict[str, Any] = {}

    @field_validator("options")
    @classmethod
    def _options(cls, v: dict[str, Any]) -> dict[str, Any]:
        taken = sorted(k for k in v if k.replace("_", "-") in RESERVED_OPTIONS)
        if taken:
            raise ValueError(f"studyflow sets {', '.join(taken)} itself; remove them from options")
        return v

    @field_validator("sbatch")
    @classmethod
    def _sbatch(cls, v: str | None) -> str | None:
        if v is None:
            return v
        if "\n" in v or not v.strip():
            raise ValueError("must be one line of sbatch flags")
        # The plugin sets these flags itself and refuses a job that repeats them, at submission,
        # in a way that leaves Snakemake waiting; so they are refused here, before anything runs.
        for pattern, what in SBATCH_SET_BY_PLUGIN.items():
            if re.search(pattern, v):
                raise ValueError(f"sets the {what}, which comes from the study's resources/cluster keys "
                                 "or the executor; remove it")
        return v


def cluster_settings(study: Study) -> ClusterSettings:
    """The checked ``cluster:`` block of ``study`` (defaults when the study has none)."""
    raw = {} if study.cluster is None else study.cluster.model_dump(exclude_none=True)
    try:
        return ClusterSettings.model_validate(raw)
    except ValidationError as exc:
        file = str(getattr(study, "_file", None) or "study.yaml")
        problems = []
        for err in exc.errors(include_url=False):
            key = "cluster." + ".".join(str(p) for p in err["loc"])
            msg = err["msg"]
            if err["type"] == "extra_forbidden":
                known = ", ".join(ClusterSettings.model_fields)
                msg = f"is not a known key; known keys: {known}"
            elif msg.startswith("Value error, "):
                msg = msg[len("Value error, "):]
            elif msg.startswith("Input should be"):
                msg = "must be" + msg[len("Input should be"):]
            problems.append(Problem(file, key, err.get("input"), msg))
        raise StudySpecError(problems) from None
