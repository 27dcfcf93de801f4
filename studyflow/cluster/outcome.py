"""After a cluster run: tidy the failure markers of batched steps, and give every case that a
failed scheduler job took down the scheduler's reason.

A step the scheduler killed (wall time, memory, node failure, scancel) or never started (its
batch job died first, or sbatch refused it) has no status of this run, or one saying
"interrupted". Its status file is rewritten as failed with the job's reason, e.g. ``cluster job
812 TIMEOUT (the batch job's wall-time limit was reached); scheduler log .snakemake/...``, so
``studyflow status`` and the results table (``status``/``reason`` columns, read from the status
files) show it. A failure the step runner recorded itself (exit code, time-out of the solver,
missing output) is left as it is: it is the more precise reason, except a step the runner saw
killed by a signal, which gets the job's reason with the runner's words after it.

Which case ran in which scheduler job is read from the Snakemake log of the run: each failed
job is reported there with its outputs (the steps' done markers) and its scheduler log, whose
file name is the scheduler's job id.
"""

from __future__ import annotations

import os
import re
import shutil
import socket
import subprocess
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from datetime import UTC, datetime
from pathlib import Path

from ..spec.model import Study
from ..workflow import signature as sig
from .batchstep import is_failure_marker

QUERY_TIMEOUT_S = 15
_MARKER = re.compile(r"cases/([A-Za-z0-9][A-Za-z0-9._-]*)/\.studyflow/([^/\s,]+)\.done")
_SLURM_LOG = re.compile(r"(\S*slurm_logs/\S*?(\d+)\.log)")
_EXTERNAL = re.compile(r"external_jobid:\s*(\d+)")
_SUBMITTED = re.compile(r"submitted with SLURM jobid (\d+) \(log: (\S+?)\)")

STATE_TEXT = {
    "TIMEOUT": "the batch job's wall-time limit was reached",
    "OUT_OF_MEMORY": "the job ran out of its memory limit",
    "NODE_FAIL": "the node running the job failed",
    "CANCELLED": "the job was cancelled",
    "PREEMPTED": "the job was preempted",
    "BOOT_FAIL": "the node could not boot",
    "DEADLINE": "the job's deadline passed",
    "FAILED": "the job ended with an error",
}


@dataclass
class FailedJob:
    """One failed Snakemake job of the run (a single step or a whole batch)."""

    outputs: list[tuple[str, str]] = field(default_factory=list)  # (case, step)
    job_id: str | None = None
    log: str | None = None
    message: str | None = None


def parse_failures(text: str) -> list[FailedJob]:
    """The failed jobs a Snakemake log reports, with their outputs and scheduler job ids.

    Snakemake reports a failed group once for the group (with the scheduler log) and once per
    member rule (without it); members inherit the job id of the group that holds their output.
    """
    blocks: list[FailedJob] = []
    current: FailedJob | None = None
    for line in text.splitlines():
        stripped = line.strip()
        if "Error in rule " in line or "Error in group " in line:
            current = FailedJob()
            blocks.append(current)
            continue
        if current is None:
            continue
        if not line.startswith((" ", "\t")) and stripped:
            current = None  # the block ended
            continue
        if stripped.startswith("message:"):
            msg = stripped[len("message:"):].strip()
            if msg and msg != "None" and not msg.startswith("Error in group"):
                current.message = msg
        m = _SLURM_LOG.search(stripped) if stripped.startswith("log:") else None
        if m:
            current.log, current.job_id = m.group(1), current.job_id or m.group(2)
        m = _EXTERNAL.search(stripped)
        if m:
            current.job_id = m.group(1)
        if stripped.startswith("output:"):
            current.outputs += _MARKER.findall(stripped)
    owner: dict[tuple[str, str], FailedJob] = {}
    for b in blocks:
        if b.job_id:
            for out in b.outputs:
                owner.setdefault(out, b)
    for b in blocks:
        if not b.job_id:
            src = next((owner[o] for o in b.outputs if o in owner), None)
            if src is not None:
                b.job_id, b.log = src.job_id, b.log or src.log
    return [b for b in blocks if b.outputs]


def job_state(job_id: str) -> tuple[str | None, str | None]:
    """(state, detail) of a scheduler job, from scontrol while the controller still knows it."""
    if shutil.which("scontrol") is None:
        return None, None
    try:
        done = subprocess.run(["scontrol", "show", "job", "-o", job_id], capture_output=True, text=True,
                              timeout=QUERY_TIMEOUT_S, check=False)
    except (OSError, subprocess.TimeoutExpired):
        return None, None
    if done.returncode != 0:
        return None, None
    fields = dict(tok.split("=", 1) for tok in done.stdout.split() if "=" in tok)
    state = fields.get("JobState")
    return state, exit_detail(fields.get("ExitCode", ""))


def exit_detail(code: str) -> str | None:
    """SLURM's ``ExitCode=N:S`` (exit status N, or killed by signal S) in words."""
    status, _, signo = code.partition(":")
    if signo.isdigit() and int(signo):
        return f"killed by signal {signo}"
    if status.isdigit() and int(status):
        return f"exit code {status}"
    return None


def state_from_log(path: Path) -> str | None:
    """The scheduler's own words at the end of a job log (``*** JOB 7 ... DUE TO TIME LIMIT ***``)."""
    try:
        tail = path.read_text(encoding="utf-8", errors="replace")[-20000:]
    except OSError:
        return None
    if "DUE TO TIME LIMIT" in tail:
        return "TIMEOUT"
    if re.search(r"oom[-_ ]kill|Out Of Memory|OUT_OF_MEMORY", tail, re.IGNORECASE):
        return "OUT_OF_MEMORY"
    if "DUE TO NODE FAILURE" in tail:
        return "NODE_FAIL"
    if "CANCELLED" in tail:
        return "CANCELLED"
    return None


def job_reason(job: FailedJob, root: Path) -> str:
    """One line that says which scheduler job failed, how, and where its log is."""
    state, detail = job_state(job.job_id) if job.job_id else (None, None)
    log = Path(job.log) if job.log else None
    if log is not None and not log.is_absolute():
        log = root / log
    if log is not None:
        from_log = state_from_log(log)
        if from_log and state in (None, "FAILED", "CANCELLED", "COMPLETED"):
            state = from_log
    words = [f"cluster job {job.job_id}" if job.job_id else "cluster job"]
    if state:
        words.append(state)
        if state in STATE_TEXT:
            words.append(f"({STATE_TEXT[state]}{'; ' + detail if detail else ''})")
    elif job.message:
        words.append(f"failed: {job.message}")
    else:
        words.append("failed")
    text = " ".join(words)
    if log is not None:
        try:
            shown = log.resolve().relative_to(root.resolve()).as_posix()
        except ValueError:
            shown = str(log)
        text += f"; scheduler log {shown}"
    return text


def clear_failure_markers(study: Study, cases: Iterable[str]) -> int:
    """Remove the failure markers batched steps left (their status files keep the reason)."""
    n = 0
    for case in cases:
        d = str(study.cases_dir / case)
        for step in study.step_names():
            path = sig.marker_path(d, step)
            if is_failure_marker(sig.read_json(path)):
                try:
                    os.unlink(path)
                    n += 1
                except FileNotFoundError:
                    pass
    return n


CLOCK_SKEW_S = 30.0  # compute nodes' clocks may lag the login node's a little


def _own_result(status: dict | None, started_at: float) -> bool:
    """The step runner recorded this step in this run, with a result of its own."""
    if not status or (status.get("started_at") or 0) < started_at - CLOCK_SKEW_S:
        return False
    if status.get("state") == "ok":
        return True
    return status.get("state") == "failed" and status.get("reason") != "interrupted"


def _killed_by_signal(status: dict) -> bool:
    """The step runner recorded its process as ended by a signal (negative exit code), which on a
    cluster is usually the scheduler cancelling or timing out the job."""
    code = status.get("exit_code")
    return status.get("state") == "failed" and isinstance(code, int) and code < 0


def record_job_failures(study: Study, cases: Sequence[str], log_text: str, started_at: float) -> dict[str, str]:
    """Give each step a failed scheduler job took down the job's reason; returns case -> reason."""
    wanted = set(cases)
    steps = study.step_names()
    written: dict[str, str] = {}
    reasons: dict[str, str] = {}
    order = {name: i for i, name in enumerate(steps)}
    for job in parse_failures(log_text):
        # A case's steps in study order: the first one not finished gets the reason.
        for case, step in sorted(set(job.outputs), key=lambda cs: (cs[0], order.get(cs[1], 0))):
            if case not in wanted or step not in order or case in written:
                continue
            d = str(study.cases_dir / case)
            path = sig.status_path(d, step)
            status = sig.read_json(path)
            key = job.job_id or str(id(job))
            killed = _own_result(status, started_at) and _killed_by_signal(status)
            if _own_result(status, started_at) and not killed:
                if status.get("state") == "failed":
                    written[case] = status.get("reason") or ""
                continue
            if key not in reasons:  # one scheduler query per job, however many cases it held
                reasons[key] = job_reason(job, study.root)
            reason = reasons[key]
            if killed:
                # The runner saw only the signal; the scheduler knows why it was sent.
                reason = f"{reason}; the step was {status.get('reason')}"
            now = datetime.now(UTC).isoformat(timespec="seconds")
            doc = dict(status or {})
            doc.update({"case": case, "step": step, "state": "failed", "reason": reason,
                        "exit_code": (status or {}).get("exit_code"), "ended": now,
                        "started": (status or {}).get("started") or now,
                        "started_at": (status or {}).get("started_at") or started_at,
                        "host": (status or {}).get("host") or socket.gethostname(),
                        "cluster_job": job.job_id})
            os.makedirs(os.path.dirname(path), exist_ok=True)
            sig.write_json_atomic(path, doc)
            written[case] = reason
    return written


def finish_cluster_run(study: Study, cases: Sequence[str], log_path: Path, started_at: float) -> dict[str, str]:
    """Everything to do after the engine stopped: markers, then the scheduler's reasons."""
    clear_failure_markers(study, cases)
    try:
        text = Path(log_path).read_text(encoding="utf-8", errors="replace")
    except OSError:
        text = ""
    return record_job_failures(study, cases, text, started_at)


def submitted_jobs(log_text: str) -> list[tuple[str, str]]:
    """(scheduler job id, its log) of every job the run submitted."""
    return _SUBMITTED.findall(log_text)
