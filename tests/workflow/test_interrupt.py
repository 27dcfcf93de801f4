"""Interrupted runs: SIGINT to the run's process group, SIGKILL of every process, then a rerun.

Each step appends its case id to an append-only file only after its output is complete, so the
file counts finished executions independently of studyflow's own records.
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
from collections import Counter
from pathlib import Path

import pytest

from studyflow import api
from studyflow.errors import EXIT_BUSY, EXIT_INTERRUPTED, StudyBusyError
from studyflow.workflow.lock import RunLock, holder

from sfstudies import executions, gone, table_study, wait_for

REPO = Path(__file__).resolve().parents[2]
POINTS = 6
CASES = [f"p{i:02d}--m{k}" for i in range(POINTS) for k in range(2)]


# One Snakemake job per step, and batches of three cases per job (studyflow.workflow.runbatch).
BATCHES = pytest.mark.parametrize("batch", ["off", "3"])


def start_run(root: Path, batch: str = "off") -> subprocess.Popen:
    env = {**os.environ, "PYTHONPATH": str(REPO)}
    return subprocess.Popen([sys.executable, "-m", "studyflow.cli", "run", str(root), "--cores", "2", "--quiet",
                             "--batch", batch],
                            env=env, start_new_session=True, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)


def done_markers(root: Path) -> int:
    return sum(1 for c in CASES if (root / "cases" / c / ".studyflow/solve.done").exists())


def engine_pgid(root: Path) -> int:
    return json.loads((root / ".studyflow/run.json").read_text())["engine_pgid"]


def check_half_written_not_collected(root: Path) -> None:
    unfinished = [c for c in CASES if not (root / "cases" / c / ".studyflow/solve.done").exists()]
    assert unfinished, "the interruption came too late to test anything"
    half = [c for c in unfinished if (root / "cases" / c / "out.txt").exists()]
    res = api.collect(root, write=False).results
    rows = res[res["case"].isin(unfinished)]
    assert (rows["status"] != "done").all()
    assert rows["value"].isna().all()  # nothing read from a half-written out.txt
    for c in half:
        assert (root / "cases" / c / "out.txt").read_text() == '{"result": '


def rerun_completes_each_case_once(root: Path) -> None:
    out = api.run(root, cores=2, progress=False)  # no --unlock or clean-up needed
    assert out.exit_code == 0
    assert Counter(executions(root)) == Counter({c: 1 for c in CASES})
    values = dict(zip(out.tables.results["case"], out.tables.results["value"]))
    assert values == {f"p{i:02d}--m{k}": 10 * i + 2 * 2**k for i in range(POINTS) for k in range(2)}


@BATCHES
def test_sigint_to_the_group_then_rerun(tmp_path: Path, batch: str) -> None:
    root = table_study(tmp_path / "s", points=POINTS, levels=2, sleep=1.0)
    proc = start_run(root, batch)
    wait_for(lambda: done_markers(root) >= 2)
    pgid = engine_pgid(root)
    st = api.status(root)  # from another process while the run goes on
    assert st.running is not None and st.running["pid"] == proc.pid
    assert st.counts()["done"] >= 2 and st.time_left_s() is not None
    os.killpg(proc.pid, signal.SIGINT)  # Ctrl-C in the terminal: the command's whole group
    assert proc.wait(timeout=60) == EXIT_INTERRUPTED
    wait_for(lambda: gone(pgid), 30)  # nothing of the engine outlives the run
    assert holder(root / ".studyflow") is None
    check_half_written_not_collected(root)
    rerun_completes_each_case_once(root)


@BATCHES
def test_sigkill_of_everything_then_rerun(tmp_path: Path, batch: str) -> None:
    root = table_study(tmp_path / "s", points=POINTS, levels=2, sleep=1.0)
    proc = start_run(root, batch)
    wait_for(lambda: done_markers(root) >= 2)
    pgid = engine_pgid(root)
    os.killpg(proc.pid, signal.SIGKILL)
    os.killpg(pgid, signal.SIGKILL)
    proc.wait(timeout=30)
    wait_for(lambda: gone(pgid), 30)
    st = api.status(root)
    assert st.running is None and st.counts()["done"] >= 2
    plan = api.plan(root)
    assert set(plan.reasons()) <= {"interrupted (started, never finished)", "never run"}
    check_half_written_not_collected(root)
    rerun_completes_each_case_once(root)


def test_second_run_is_refused_while_one_holds_the_study(tmp_path: Path) -> None:
    root = table_study(tmp_path / "s", points=1, levels=1)
    code = ("import sys, time; from pathlib import Path; from studyflow.workflow.lock import RunLock; "
            "RunLock(Path(sys.argv[1])).acquire(); print('locked', flush=True); time.sleep(60)")
    other = subprocess.Popen([sys.executable, "-c", code, str(root / ".studyflow")], stdout=subprocess.PIPE,
                             text=True, env={**os.environ, "PYTHONPATH": str(REPO)})
    try:
        assert other.stdout.readline().strip() == "locked"
        with pytest.raises(StudyBusyError) as info:
            api.run(root, progress=False)
        assert info.value.exit_code == EXIT_BUSY
        assert f"pid {other.pid} on {os.uname().nodename}, started " in str(info.value)
    finally:
        other.kill()  # SIGKILL: the kernel drops the lock with the process
        other.wait()
    with RunLock(root / ".studyflow"):
        pass
