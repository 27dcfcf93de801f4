"""Failed scheduler jobs found in a Snakemake log and their reasons written into the cases' status.

``data/group_failure.log`` and ``data/rule_failure.log`` are the end of real Snakemake 9.27.1 logs
(snakemake-executor-plugin-slurm 2.8.0, SLURM 22.05.8) of a batch job and of a single-case job
that were cancelled; only the study folder's path was shortened. SLURM's job state names
(CANCELLED, TIMEOUT, ...) and its ``ExitCode=status:signal`` notation are those of the
``scontrol show job`` manual page.
"""

from __future__ import annotations

import json
import time
from pathlib import Path

from cluster_studies import make_study

from studyflow import api
from studyflow.cluster import outcome

DATA = Path(__file__).parent / "data"


def test_group_failure_gives_every_member_the_batch_job():
    jobs = outcome.parse_failures((DATA / "group_failure.log").read_text())
    assert {(j.job_id, tuple(sorted(j.outputs))) for j in jobs} == {
        ("25", (("x1--m0", "solve"), ("x99--m0", "solve"))),
        ("25", (("x99--m0", "solve"),)),
        ("25", (("x1--m0", "solve"),)),
    }
    assert all(j.log.endswith("group_sf_batch_sf_solve/25.log") for j in jobs)


def test_rule_failure_with_the_plugins_message():
    (job,) = outcome.parse_failures((DATA / "rule_failure.log").read_text())
    assert job.job_id == "26" and job.outputs == [("x99--m0", "solve")]
    assert "CANCELLED" in job.message
    assert outcome.submitted_jobs((DATA / "rule_failure.log").read_text())[0][0] == "26"


def test_exit_detail_reads_slurm_exit_codes():
    assert outcome.exit_detail("0:15") == "killed by signal 15"
    assert outcome.exit_detail("3:0") == "exit code 3"
    assert outcome.exit_detail("0:0") is None


def test_reasons_written_only_where_the_step_runner_left_none(tmp_path, monkeypatch):
    study = api.load_study(make_study(tmp_path, [1, 99], {"batch": 2}))
    api.render(study)
    started = time.time()
    # x1 never started (its batch was cancelled first); x99 recorded a failure of its own.
    own = study.cases_dir / "x99--m0" / ".studyflow" / "solve.status.json"
    own.write_text(json.dumps({"state": "failed", "reason": "exit code 3", "started_at": started + 1}))
    monkeypatch.setattr(outcome, "job_state", lambda job_id: ("CANCELLED", "killed by signal 15"))

    written = outcome.record_job_failures(study, ["x1--m0", "x99--m0"],
                                          (DATA / "group_failure.log").read_text(), started)

    reason = ("cluster job 25 CANCELLED (the job was cancelled; killed by signal 15); scheduler log "
              "/home/eng/studies/demo/.snakemake/slurm_logs/group_sf_batch_sf_solve/25.log")
    assert written == {"x1--m0": reason, "x99--m0": "exit code 3"}
    status = json.loads((study.cases_dir / "x1--m0" / ".studyflow" / "solve.status.json").read_text())
    assert (status["state"], status["reason"], status["cluster_job"]) == ("failed", reason, "25")
    assert json.loads(own.read_text())["reason"] == "exit code 3"  # the more precise reason stays
    st = {c.case: (c.status, c.reason) for c in api.status(study).cases}
    assert st["x1--m0"] == ("failed", f"solve: {reason}")


def test_time_limit_read_from_the_scheduler_log(tmp_path):
    log = tmp_path / "7.log"
    log.write_text("slurmstepd: error: *** JOB 7 ON localhost CANCELLED AT 2026-12-01T23:00:00 "
                   "DUE TO TIME LIMIT ***\n")
    assert outcome.state_from_log(log) == "TIMEOUT"
