"""Step runner for cases batched into one scheduler job: ``python -m studyflow.cluster.batchstep CASE STEP``.

Inside a batch (a Snakemake job group), Snakemake stops the whole group at the first failed
job and the main process then counts every case of the group as failed. So that one failed
case is reported on its own and the others of its batch still run, this wrapper runs the normal
step runner (``studyflow.workflow.runstep``: it writes the case's status file with the reason)
and, when the step failed, writes a *failure marker* in place of the done marker and exits 0.
A failure marker is JSON ``{"failed": true, ...}`` with no signature: the plan and the case
state read it as "not done" (the status file says failed), and ``studyflow.cluster.outcome``
removes it when the run ends, so the next run reruns the step.

A step whose upstream step left a failure marker is not run; it is recorded as failed
("upstream step X failed") with a failure marker of its own.

An interruption (the scheduler's SIGTERM at the batch's wall-time limit, scancel) is passed on
as a failure of the job: the batch is ending anyway, and the scheduler's reason is attached
after the run. Standard library only (it runs once per case and step).
"""

from __future__ import annotations

import os
import sys
import time

from ..workflow import runstep
from ..workflow import signature as sig

FAILED_KEY = "failed"


def is_failure_marker(doc: dict | None) -> bool:
    return bool(doc) and bool(doc.get(FAILED_KEY))


def _write_failure(case_dir: str, step: str, reason: str | None) -> None:
    doc = {FAILED_KEY: True, "signature": None, "reason": reason, "finished": runstep.now_iso(),
           "slurm_job_id": os.environ.get("SLURM_JOB_ID")}
    sig.write_json_atomic(sig.marker_path(case_dir, step), doc)


def _upstream_failed(case_dir: str, step: str) -> str | None:
    doc = sig.read_json(sig.step_json_path(case_dir, step)) or {}
    upstream = doc.get("upstream")
    if upstream and is_failure_marker(sig.read_json(sig.marker_path(case_dir, upstream))):
        return upstream
    return None


def run(case_dir: str, step: str) -> int:
    case_dir = os.path.abspath(case_dir)
    upstream = _upstream_failed(case_dir, step)
    if upstream is not None:
        os.makedirs(os.path.join(case_dir, sig.STATE), exist_ok=True)
        now = time.time()
        reason = f"upstream step {upstream} failed"
        sig.write_json_atomic(sig.status_path(case_dir, step), {
            "case": os.path.basename(case_dir), "step": step, "state": "failed", "reason": reason,
            "exit_code": None, "wall_s": 0.0, "started": runstep.now_iso(), "ended": runstep.now_iso(), "started_at": now,
            "host": os.uname().nodename, "pid": os.getpid()})
        _write_failure(case_dir, step, reason)
        return 0
    rc = runstep.run(case_dir, step)
    if rc == 0 or rc == runstep.EXIT_INTERRUPTED:
        return rc
    status = sig.read_json(sig.status_path(case_dir, step))
    if status is None or status.get("state") != "failed":
        return rc  # the runner could not even record the step (no step file): a real job error
    _write_failure(case_dir, step, status.get("reason"))
    return 0


def main(argv: list[str] | None = None) -> int:
    args = sys.argv[1:] if argv is None else argv
    if len(args) != 2:
        sys.stderr.write("usage: python -m studyflow.cluster.batchstep CASE_DIR STEP\n")
        return 2
    return run(args[0], args[1])


if __name__ == "__main__":
    sys.exit(main())
