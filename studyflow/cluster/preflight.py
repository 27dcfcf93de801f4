"""Checks before a cluster run: the scheduler's commands, Snakemake's executor plugin, and the
scheduler settings the plugin's job polling depends on.

Each failure is a ``WorkflowError`` that says what is missing and how to get it, raised before
anything is rendered or submitted.
"""

from __future__ import annotations

import importlib.metadata
import importlib.util
import re
import shutil
import subprocess
from dataclasses import dataclass

from ..errors import WorkflowError
from .settings import ClusterSettings

SLURM_COMMANDS = ("sbatch", "squeue", "sinfo", "scontrol", "scancel")
PLUGIN = {"slurm": ("snakemake_executor_plugin_slurm", "snakemake-executor-plugin-slurm")}
QUERY_TIMEOUT_S = 20


@dataclass(frozen=True)
class SchedulerInfo:
    """What the running scheduler told us, and the status command the run will use."""

    plugin_version: str
    accounting: bool
    min_job_age_s: int | None
    status_command: str


def missing_commands(commands: tuple[str, ...] = SLURM_COMMANDS) -> list[str]:
    return [c for c in commands if shutil.which(c) is None]


def require_commands(executor: str = "slurm") -> None:
    missing = missing_commands()
    if missing:
        raise WorkflowError(
            f"cannot run on {executor.upper()}: the scheduler command(s) {', '.join(missing)} are not on PATH. "
            "Run studyflow on a login node of the cluster (or inside a batch job), or install the "
            "SLURM client tools (Debian: apt-get install slurm-client; a test cluster on this machine: "
            "slurm-wlm and munge, then scripts/slurm-local start).")


def require_plugin(executor: str = "slurm") -> str:
    """The installed plugin's version; a clear error when it is missing."""
    module, dist = PLUGIN[executor]
    if importlib.util.find_spec(module) is None:
        raise WorkflowError(
            f"cannot run on {executor.upper()}: Snakemake's executor plugin {dist} is not installed. "
            f"Install the optional extra: pip install 'studyflow[cluster]' (or pip install {dist}).")
    try:
        return importlib.metadata.version(dist)
    except importlib.metadata.PackageNotFoundError:
        return "unknown"


def _query(argv: list[str]) -> str:
    try:
        done = subprocess.run(argv, capture_output=True, text=True, timeout=QUERY_TIMEOUT_S, check=False)
    except subprocess.TimeoutExpired:
        raise WorkflowError(f"the SLURM controller did not answer {' '.join(argv)} within "
                            f"{QUERY_TIMEOUT_S} s; is slurmctld running?") from None
    except OSError as exc:
        raise WorkflowError(f"cannot run {argv[0]}: {exc}") from None
    if done.returncode != 0:
        text = (done.stderr or done.stdout).strip().splitlines()
        raise WorkflowError(f"the SLURM controller does not answer ({' '.join(argv)} exited "
                            f"{done.returncode}: {text[-1] if text else 'no message'}); "
                            "is the cluster up (scripts/slurm-local status on a test machine)?")
    return done.stdout


def parse_config(text: str) -> dict[str, str]:
    """``scontrol show config`` as a mapping of key to value (text, stripped)."""
    out: dict[str, str] = {}
    for line in text.splitlines():
        key, sep, value = line.partition("=")
        if sep and key.strip() and " " not in key.strip():
            out[key.strip()] = value.strip()
    return out


def seconds(value: str | None) -> int | None:
    """A SLURM duration as printed by scontrol (``300 sec``, ``1h``, ``300``) in seconds."""
    if not value:
        return None
    m = re.match(r"^(\d+)\s*([A-Za-z]*)", value)
    if not m:
        return None
    n, unit = int(m.group(1)), m.group(2).lower()
    return n * 3600 if unit in ("h", "hour", "hours") else n * 60 if unit in ("min", "mins") else n


def check_scheduler(settings: ClusterSettings) -> SchedulerInfo:
    """Everything a SLURM run needs, checked; returns what the profile must say about polling.

    Without an accounting database ``sacct`` cannot report a job, so the plugin must poll with
    ``squeue``, which only sees a job for ``MinJobAge`` seconds after it ended. The plugin
    itself switches from squeue back to sacct when MinJobAge is below three times its first-poll
    delay; on a cluster without accounting that would poll forever, so it is refused here.
    """
    require_commands(settings.executor)
    version = require_plugin(settings.executor)
    config = parse_config(_query(["scontrol", "show", "config"]))
    storage = config.get("AccountingStorageType", "")
    accounting = bool(storage) and not storage.endswith("/none")
    min_age = seconds(config.get("MinJobAge"))
    command = settings.status_command or ("sacct" if accounting else "squeue")
    if command == "sacct" and not accounting:
        raise WorkflowError(
            f"cluster.status_command is sacct, but this cluster keeps no job accounting "
            f"(AccountingStorageType={storage or 'unset'}); use squeue or leave the key out")
    if command == "squeue":
        need = 3 * settings.first_check_s
        if min_age is None or min_age < need:
            raise WorkflowError(
                f"polling jobs with squeue needs the cluster to keep finished jobs visible for at least "
                f"{need} s (3 x cluster.first_check_s = {settings.first_check_s}), but MinJobAge is "
                f"{min_age if min_age is not None else 'unknown'} s; lower cluster.first_check_s, raise "
                "MinJobAge in slurm.conf, or use sacct where accounting is on")
    if settings.partition:
        names = {p.strip().rstrip("*") for p in _query(["sinfo", "-h", "-o", "%P"]).split()}
        for wanted in settings.partition.split(","):
            if wanted not in names:
                raise WorkflowError(f"cluster.partition {wanted!r} is not a partition of this cluster "
                                    f"(sinfo lists: {', '.join(sorted(names)) or 'none'})")
    return SchedulerInfo(version, accounting, min_age, command)


def check_requests(requests: list[list[str]]) -> None:
    """Ask the scheduler whether it would accept each job (``sbatch --test-only``: nothing is
    submitted). A job the cluster refuses (no such partition, more cores or memory than a node
    has, a wall time over the partition's limit) fails here with the scheduler's words, instead of
    at submission, where the plugin's error leaves Snakemake waiting."""
    for flags in requests:
        argv = ["sbatch", "--test-only", "--output", "/dev/null", *flags, "--wrap", "true"]
        try:
            done = subprocess.run(argv, capture_output=True, text=True, timeout=QUERY_TIMEOUT_S, check=False)
        except subprocess.TimeoutExpired:
            raise WorkflowError(f"the SLURM controller did not answer sbatch --test-only within "
                                f"{QUERY_TIMEOUT_S} s") from None
        if done.returncode != 0:
            words = " ".join(line.strip() for line in (done.stderr or done.stdout).splitlines() if line.strip())
            raise WorkflowError(
                f"SLURM would refuse the study's jobs (sbatch {' '.join(flags)}): {words or 'no message'}. "
                "Check resources (cores, memory_mb, time_min), cluster.batch x time_min against the "
                "partition's time limit, and cluster.partition/account/qos/sbatch in study.yaml")
