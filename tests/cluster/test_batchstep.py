"""The batch step runner: a failed case is recorded on its own and does not fail its batch job.

The outside reference is the demo solver's behaviour (exit code 3 for a negative input) and the
exit-status convention Snakemake applies to a job (non-zero = failed job, which in a job group
stops the group: Snakemake 9 documentation, "Job grouping").
"""

from __future__ import annotations

import json

from cluster_studies import make_study

from studyflow import api
from studyflow.cluster import batchstep
from studyflow.cluster.outcome import clear_failure_markers
from studyflow.workflow.state import case_state


def _rendered(tmp_path, values, post=False):
    study = api.load_study(make_study(tmp_path, values, {"batch": 2}, post=post))
    api.render(study)
    return study


def test_failed_step_leaves_a_failure_marker_and_exits_zero(tmp_path):
    study = _rendered(tmp_path, [-1, 2])
    bad, good = study.cases_dir / "x-1--m0", study.cases_dir / "x2--m0"

    assert batchstep.run(str(bad), "solve") == 0  # the batch job goes on
    assert batchstep.run(str(good), "solve") == 0

    marker = json.loads((bad / ".studyflow" / "solve.done").read_text())
    assert marker["failed"] is True and marker["signature"] is None
    status = json.loads((bad / ".studyflow" / "solve.status.json").read_text())
    assert (status["state"], status["reason"], status["exit_code"]) == ("failed", "exit code 3: negative input -1", 3)
    # The case state and the plan read the failure marker as "not done".
    assert case_state(bad, ["solve"]).status == "failed"
    assert case_state(good, ["solve"]).status == "done"
    plan = api.plan(study)
    assert plan.cases_to_run() == ["x-1--m0"]
    assert plan.case_reason("x-1--m0") == "solve: failed before (exit code 3: negative input -1)"

    assert clear_failure_markers(study, ["x-1--m0", "x2--m0"]) == 1
    assert not (bad / ".studyflow" / "solve.done").exists()
    assert (good / ".studyflow" / "solve.done").exists()


def test_step_after_a_failed_step_is_not_run(tmp_path):
    study = _rendered(tmp_path, [-1], post=True)
    case = study.cases_dir / "x-1--m0"
    assert batchstep.run(str(case), "solve") == 0
    assert batchstep.run(str(case), "post") == 0
    status = json.loads((case / ".studyflow" / "post.status.json").read_text())
    assert (status["state"], status["reason"]) == ("failed", "upstream step solve failed")
    assert not (case / "logs" / "post.log").exists()  # its command never started
    st = case_state(case, ["solve", "post"])
    assert (st.status, st.reason) == ("failed", "solve: exit code 3: negative input -1")


def test_a_missing_step_file_is_still_a_job_error(tmp_path):
    study = _rendered(tmp_path, [1])
    assert batchstep.run(str(study.cases_dir / "x1--m0"), "nosuchstep") != 0
