"""Studies run on a real single-node SLURM cluster through snakemake-executor-plugin-slurm.

What is checked comes from outside studyflow's orchestration: the scheduler's own record of each
submitted job (``scontrol show job``: CPUs, memory, time limit, partition, state), the number of
jobs sbatch accepted, the bundled solver's documented exit code for a bad case file and its
result for the same case run by hand, and the scheduler's state of a job that was cancelled.
Every run is bounded by a hard time-out.
"""

from __future__ import annotations

import json
import re
import signal
import subprocess
import threading
from pathlib import Path

import pandas as pd
import pytest
from cluster_studies import make_cavity_study, make_study

from studyflow import api
from studyflow.cluster.outcome import submitted_jobs
from studyflow.errors import WorkflowError

pytestmark = pytest.mark.slurm

RUN_TIMEOUT_S = 300  # generous: the polling back-off alone adds up to a minute on a busy machine


class _Timeout(Exception):
    pass


def _run_bounded(study: Path, **kw):
    """api.run under a hard alarm: a hung scheduler fails the test instead of hanging CI."""

    def on_alarm(signum, frame):
        raise _Timeout(f"cluster run of {study} took longer than {RUN_TIMEOUT_S} s")

    old = signal.signal(signal.SIGALRM, on_alarm)
    signal.alarm(RUN_TIMEOUT_S)
    try:
        return api.run(study, executor="slurm", progress=False, **kw)
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, old)


def _job(job_id: str) -> dict[str, str]:
    out = subprocess.run(["timeout", "-k", "2", "15", "scontrol", "show", "job", "-o", job_id],
                         capture_output=True, text=True, check=True).stdout
    return dict(tok.split("=", 1) for tok in out.split() if "=" in tok)


def _mb(text: str) -> float:
    m = re.match(r"^([\d.]+)([KMGT]?)", text)
    assert m, text
    return float(m.group(1)) * {"K": 1 / 1024, "": 1, "M": 1, "G": 1024, "T": 1024 ** 2}[m.group(2)]


@pytest.fixture(scope="module")
def cluster_runs(slurm_cluster, tmp_path_factory):
    """Both demo studies run at once (the node has room for both), so the scheduler's polling
    delays are paid once: a batched study of six cases, one failing on purpose, and a study whose
    second case cancels its own scheduler job."""
    batched = make_cavity_study(tmp_path_factory.mktemp("batched"),
                                {"batch": 3, "partition": "local", "first_check_s": 2},
                                reynolds=[10.0, 20.0, 40.0, 80.0, 160.0], failing_re=1.0e9)
    cancelled = make_study(tmp_path_factory.mktemp("cancelled"), [1, 99],
                           {"partition": "local", "first_check_s": 2})
    side: dict = {}

    def run_side() -> None:
        try:
            side["outcome"] = api.run(cancelled, executor="slurm", progress=False)
        except BaseException as exc:  # reported by the test that needs it
            side["error"] = exc

    thread = threading.Thread(target=run_side, daemon=True)
    thread.start()
    main = _run_bounded(batched)
    thread.join(RUN_TIMEOUT_S)
    if thread.is_alive():
        pytest.fail(f"the cancelled-job study did not finish within {RUN_TIMEOUT_S} s")
    return {"batched": (batched, main), "cancelled": (cancelled, side)}


def test_batched_study_runs_through_sbatch_and_reports_the_failed_case(cluster_runs, tmp_path):
    study, outcome = cluster_runs["batched"]

    by_case = {c.case: c for c in outcome.cases}
    assert len(by_case) == 6
    failed = [c for c in outcome.cases if c.status == "failed"]
    assert [c.case for c in failed] == ["too-fast--m0"]
    # studyflow-fv exits 3 for a bad case file (its documented exit codes, studyflow/fvsolver/cli.py).
    # The reason carries the solver's own last words after the exit code (the step runner's rule).
    assert failed[0].reason.startswith("solve: exit code 3: ") and "case.toml" in failed[0].reason
    assert "reynolds" in (study / "cases" / "too-fast--m0" / "logs" / "solve.log").read_text()
    assert sum(c.status == "done" for c in outcome.cases) == 5  # the rest of its batch still ran

    # Six cases in batches of three: two scheduler jobs, not six.
    log = (study / ".studyflow" / "run.log").read_text()
    jobs = submitted_jobs(log)
    assert len(jobs) == 2

    # The scheduler's own record of each job: one case's cores, its memory, the batch's summed
    # wall time (each step: 3 min limit + 10 % + 1 min start-up = 5 min, three cases = 15 min),
    # the study's partition.
    for job_id, _ in jobs:
        rec = _job(job_id)
        assert rec["Partition"] == "local"
        assert rec["NumCPUs"] == "1"
        assert _mb(rec["MinMemoryNode"]) >= 300
        assert rec["TimeLimit"] == "00:15:00"
        assert rec["JobState"] == "COMPLETED"  # a failed case does not fail its batch job

    # Status and the results table tell the same story, case by case.
    st = api.status(study)
    assert {c.case: c.status for c in st.cases} == {c: by_case[c].status for c in by_case}
    cases = pd.read_csv(study / "results" / "cases.csv").set_index("case")
    assert cases.loc["too-fast--m0", "status"] == "failed"
    assert "exit code 3" in cases.loc["too-fast--m0", "reason"]
    results = pd.read_csv(study / "results" / "results.csv")
    done = results[(results.quantity == "u_min") & (results.status == "done")].set_index("case")["value"]
    assert len(done) == 5

    # A case solved on the cluster gives the numbers the solver gives when run by hand here.
    case = next(c for c in done.index if c.startswith("Re40"))
    local = tmp_path / "by-hand"
    local.mkdir()
    (local / "case.toml").write_bytes((study / "cases" / case / "case.toml").read_bytes())
    subprocess.run(["timeout", "-k", "5", "120", "studyflow-fv", "case.toml", "--quiet"], cwd=local, check=True,
                   capture_output=True)
    assert done.loc[case] == json.loads((local / "metrics.json").read_text())["u_min"]

    # The plan of a cluster run reads like a local one: only the failed case must run again.
    plan = api.plan(study)
    assert plan.cases_to_run() == ["too-fast--m0"]
    assert plan.case_reason("too-fast--m0").startswith("solve: failed before (exit code 3: ")
    # No failure marker is left behind once the run is over.
    assert not (study / "cases" / "too-fast--m0" / ".studyflow" / "solve.done").exists()


def test_cancelled_cluster_job_shows_the_scheduler_reason(cluster_runs):
    study, side = cluster_runs["cancelled"]
    if "error" in side:
        raise side["error"]
    outcome = side["outcome"]

    by_case = {c.case: c for c in outcome.cases}
    assert by_case["x1--m0"].status == "done"
    bad = by_case["x99--m0"]
    assert bad.status == "failed"
    m = re.search(r"cluster job (\d+) CANCELLED", bad.reason)
    assert m, bad.reason
    assert _job(m.group(1))["JobState"] == "CANCELLED"  # the scheduler's own word
    cases = pd.read_csv(study / "results" / "cases.csv").set_index("case")
    assert f"cluster job {m.group(1)} CANCELLED" in cases.loc["x99--m0", "reason"]
    assert api.status(study).failures[0].reason == bad.reason


def test_job_the_scheduler_would_refuse_is_stopped_before_submitting(slurm_cluster, tmp_path):
    # More memory than the node has: sbatch --test-only answers "Requested node configuration is
    # not available" (SLURM 22.05); nothing may be rendered or submitted.
    study = make_study(tmp_path, [1], {"partition": "local", "first_check_s": 2},
                       {"cores": 1, "memory_mb": 50_000_000, "time_min": 3})
    with pytest.raises(WorkflowError) as info:
        api.run(study, executor="slurm", progress=False)
    assert "SLURM would refuse" in str(info.value) and "--mem 50000000" in str(info.value)
    assert "node configuration is not available" in str(info.value)
    assert not (study / "cases").exists()
