"""Fault injection: each fault is followed by a rerun that keeps every finished case and counts
nothing twice.

The solvers are trivial ``sh`` scripts (``support.FAULT_SOLVER``) that append one line per
execution to ``<study>/executions.log``; that file, not studyflow's records, is the count. The
spine's own tests (tests/workflow/test_interrupt.py) cover SIGINT to the whole process group,
SIGKILL of every process and a second run against a lock held by a helper process; the tests here
cover a SIGKILL of the driver alone (its engine lives on), a SIGTERM to the driver alone, a real
second ``studyflow run`` on a running study, solver faults and a full disk.

Expected values are the fake solver's own arithmetic (q = 10 a), an exact answer by construction.
"""

from __future__ import annotations

import errno
import io
import json
import math
import os
import shutil
import signal
from pathlib import Path

import pandas as pd
import pytest
from relsupport import (
    cli,
    executions,
    fault_study,
    gone,
    open_gate,
    processes_under,
    run_direct,
    status,
    wait_for,
)

from studyflow import api
from studyflow.errors import EXIT_BUSY, EXIT_CASES_FAILED, EXIT_INTERRUPTED, EXIT_OK, EXIT_SYSTEM, StudyBusyError
from studyflow.workflow.lock import holder

FAULTS = {"good": "ok", "crash": "crash", "hang": "hang", "exitv": "exitvalid", "nan": "nan", "inf": "inf",
          "trunc": "truncated", "miss": "missing"}
STEP_FAULTS = ("crash", "hang", "exitv", "miss")  # the step runner sees these and records the step failed
OUTPUT_FAULTS = ("nan", "inf", "trunc")  # the step ends well; the collector refuses the output


def any_done(root: Path) -> bool:
    return any((root / "cases").glob("*/.studyflow/solve.done"))


def table(outcome) -> pd.DataFrame:
    res = outcome.tables.results
    assert res.groupby(["case", "quantity"]).size().eq(1).all(), "a case and quantity appears twice"
    return res.set_index("case")


@pytest.mark.parametrize("batch", ["off", 2])  # one Snakemake job per step; two cases per job
def test_solver_faults_then_rerun_keeps_finished_cases(tmp_path: Path, batch: object) -> None:
    root = fault_study(tmp_path / "faults", FAULTS, time_min=0.02)  # 1.2 s wall-time limit
    first = api.run(root, cores=2, progress=False, batch=batch)
    assert first.exit_code == EXIT_CASES_FAILED
    res = table(first)
    assert len(res) == len(FAULTS)
    assert res.loc["good--m0", "status"] == "done" and res.loc["good--m0", "value"] == 11.0  # q = 10 a + 16/nx^2, a = 1, nx = 4
    reasons = res["reason"].to_dict()
    assert "killed by signal SIGSEGV" in reasons["crash--m0"]
    assert "timed out after 1.2 s" in reasons["hang--m0"]
    assert "exit code 3" in reasons["exitv--m0"]
    assert "missing output out.json" in reasons["miss--m0"]
    assert "out.json" in reasons["nan--m0"] and "q" in reasons["nan--m0"] and "nan" in reasons["nan--m0"]
    assert "out.json" in reasons["inf--m0"] and "inf" in reasons["inf--m0"]
    assert "out.json" in reasons["trunc--m0"] and "not valid JSON" in reasons["trunc--m0"]
    for pid in list(STEP_FAULTS) + list(OUTPUT_FAULTS):
        case = f"{pid}--m0"
        assert res.loc[case, "status"] == "failed", case
        # The valid-looking output of a step that exited 3, and the half-written one of the
        # crashed step, are not collected.
        assert math.isnan(res.loc[case, "value"]), case
    assert status(root, "hang--m0")["wall_s"] < 10.0  # killed at its limit, not after its 60 s sleep
    assert processes_under(root) == []  # no solver outlives its step (the hang's sleep was killed)
    assert executions(root) == {f"{p}--m0": 1 for p in FAULTS}

    good = root / "cases" / "good--m0"
    kept = {p: p.stat().st_mtime_ns for p in (good / "out.json", good / ".studyflow" / "solve.done")}
    (root / "healed").touch()  # the engineer fixed the solver
    # A refused output of a step that ended well is kept as it is; deleting it asks for a rerun.
    (root / "cases" / "trunc--m0" / "out.json").unlink()
    assert api.plan(root).case_reason("trunc--m0") == "solve: output missing (out.json)"
    second = api.run(root, cores=2, progress=False, batch=batch)
    rerun = set(STEP_FAULTS) | {"trunc"}
    assert sorted(c.case for c in second.cases) == sorted(f"{p}--m0" for p in rerun)
    counts = executions(root)
    assert counts == {f"{p}--m0": 2 if p in rerun else 1 for p in FAULTS}
    assert {p: p.stat().st_mtime_ns for p in kept} == kept  # the finished case was not touched
    res = table(second)
    for i, pid in enumerate(FAULTS):
        case = f"{pid}--m0"
        if pid in ("nan", "inf"):  # finished steps are kept as they are, with their reason
            assert res.loc[case, "status"] == "failed" and reasons[case] == res.loc[case, "reason"]
        else:
            assert res.loc[case, "status"] == "done" and res.loc[case, "value"] == 10.0 * (i + 1) + 1.0, case
    # The study still holds cases whose output was refused: the run says so in its exit code.
    assert second.exit_code == EXIT_CASES_FAILED


def test_non_finite_output_alone_fails_the_run(tmp_path: Path) -> None:
    """A step that ends well but writes NaN is a failed case (issue 2: 'non-finite value' is a
    failure reason), so the run's exit code is 1, not 0."""
    root = fault_study(tmp_path / "nan", {"good": "ok", "nan": "nan"})
    out = api.run(root, cores=2, progress=False)
    res = table(out)
    assert res.loc["nan--m0", "status"] == "failed"
    assert out.exit_code == EXIT_CASES_FAILED


def test_sigkill_of_the_driver_alone_then_rerun(tmp_path: Path, request: pytest.FixtureRequest) -> None:
    """SIGKILL of the ``studyflow run`` process only: its engine (own session) runs on, still
    holding the study; a run meanwhile is refused; once the engine ends, a rerun runs nothing
    twice and collects the table the killed driver never wrote."""
    cases = [f"p{i}--m0" for i in range(3)]
    root = fault_study(tmp_path / "kill", {f"p{i}": "gated" for i in range(3)}, time_min=1)
    request.addfinalizer(lambda: open_gate(root, *cases))  # if the test fails, no solver waits on
    proc = cli("run", str(root), "--cores", "1", "--quiet")
    wait_for(lambda: len(executions(root)) == 1)  # the engine picks which case starts first
    open_gate(root, *executions(root))
    wait_for(lambda: any_done(root))
    pgid = json.loads((root / ".studyflow" / "run.json").read_text())["engine_pgid"]
    proc.send_signal(signal.SIGKILL)
    proc.wait(timeout=30)
    assert not gone(pgid)  # the engine lives on: the other cases wait at their gates
    with pytest.raises(StudyBusyError) as info:
        api.run(root, progress=False)
    assert info.value.exit_code == EXIT_BUSY
    assert "a run is already going" in str(info.value) and str(root) in str(info.value)
    assert f"pid {proc.pid} " in str(info.value) and "that process has ended" in str(info.value)
    open_gate(root, *cases)
    wait_for(lambda: gone(pgid), 60)
    assert holder(root / ".studyflow") is None  # the lock went with the engine: no unlock needed
    assert not (root / "results" / "results.csv").exists()
    out = api.run(root, cores=2, progress=False)
    assert out.exit_code == EXIT_OK
    assert out.cases == []  # the orphaned engine finished every case; nothing runs twice
    assert executions(root) == {c: 1 for c in cases}
    assert table(out)["value"].to_dict() == {f"p{i}--m0": 10.0 * (i + 1) + 1.0 for i in range(3)}


def test_second_cli_run_refused_then_sigterm_to_the_driver(tmp_path: Path, request: pytest.FixtureRequest) -> None:
    """A real second ``studyflow run`` while one runs: refused with exit 6 naming the running one
    (its pid and host); the first is unharmed. Then SIGTERM to the first driver alone (what a
    batch system or ``kill PID`` sends): it stops the engine, exits 130, keeps finished cases."""
    cases = [f"p{i}--m0" for i in range(3)]
    root = fault_study(tmp_path / "busy", {f"p{i}": "gated" for i in range(3)}, time_min=1)
    request.addfinalizer(lambda: open_gate(root, *cases))  # if the test fails, no solver waits on
    first = cli("run", str(root), "--cores", "1", "--quiet")
    wait_for(lambda: (root / ".studyflow" / "run.json").exists() and holder(root / ".studyflow") is not None)
    second = cli("run", str(root), "--quiet")
    _, err = second.communicate(timeout=60)
    assert second.returncode == EXIT_BUSY
    assert f"{root}: a run is already going (pid {first.pid} on {os.uname().nodename}, started " in err
    assert first.poll() is None  # the refused run did not disturb the running one
    wait_for(lambda: len(executions(root)) == 1)  # the engine picks which case starts first
    open_gate(root, *executions(root))
    wait_for(lambda: any_done(root))
    wait_for(lambda: len(executions(root)) == 2)  # the next case has started and waits at its gate
    pgid = json.loads((root / ".studyflow" / "run.json").read_text())["engine_pgid"]
    first.send_signal(signal.SIGTERM)
    assert first.wait(timeout=60) == EXIT_INTERRUPTED
    wait_for(lambda: gone(pgid), 30)
    assert holder(root / ".studyflow") is None
    assert processes_under(root) == []  # the waiting solver was stopped too
    done_before = {c for c in cases if (root / "cases" / c / ".studyflow" / "solve.done").exists()}
    assert len(done_before) == 1
    open_gate(root, *cases)
    out = api.run(root, cores=2, progress=False)
    assert out.exit_code == EXIT_OK
    assert done_before.isdisjoint(c.case for c in out.cases)  # finished cases are kept
    counts = executions(root)
    assert all(counts[c] == 1 for c in done_before) and set(counts) == set(cases)
    assert table(out)["value"].to_dict() == {f"p{i}--m0": 10.0 * (i + 1) + 1.0 for i in range(3)}


# --- disk full while writing results ---------------------------------------------------------------

class _FullDisk:
    """``os.fdopen`` whose files take half of what is written, then fail with ENOSPC, from the
    ``fail_at``-th file opened on; earlier files are written normally."""

    def __init__(self, real, fail_at: int):
        self.real, self.fail_at, self.opened = real, fail_at, 0

    def __call__(self, fd, *args, **kw):
        fh = self.real(fd, *args, **kw)
        self.opened += 1
        if self.opened < self.fail_at:
            return fh
        write = fh.write

        def full(data):
            write(data[: len(data) // 2])
            fh.flush()
            raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))

        fh.write = full
        return fh


def _tables_on_disk(root: Path) -> dict[str, bytes]:
    return {p.name: p.read_bytes() for p in sorted((root / "results").iterdir())}


def _frames(files: dict[str, bytes]) -> dict[str, pd.DataFrame]:
    out = {}
    for name, data in files.items():
        out[name] = pd.read_parquet(io.BytesIO(data)) if name.endswith(".parquet") else pd.read_csv(io.BytesIO(data))
    return out


@pytest.fixture(scope="module")
def collected_once(tmp_path_factory) -> Path:
    root = fault_study(tmp_path_factory.mktemp("disk") / "s", {"a": "ok", "b": "ok", "c": "nan"}, levels=3)
    run_direct(root)
    api.collect(root, write=True)
    return root


@pytest.fixture
def collected(collected_once: Path, tmp_path: Path) -> Path:
    """A fresh copy of a run and collected study (case c's outputs are NaN)."""
    root = tmp_path / "s"
    shutil.copytree(collected_once, root, symlinks=True)
    return root


@pytest.mark.parametrize("fail_at", [1, 2, 3, 4, 5])
def test_disk_full_while_writing_results_keeps_old_or_new_tables(collected: Path, fail_at: int,
                                                                  monkeypatch: pytest.MonkeyPatch) -> None:
    """The disk fills up while the k-th of the five table files is written: every file on disk
    is whole and the set is the old one, never some new files beside old ones."""
    root = collected
    old = _tables_on_disk(root)
    (root / "cases" / "c--m0" / "out.json").write_text('{"q": 30}\n')  # a new version: case c now good
    disk = _FullDisk(os.fdopen, fail_at)
    monkeypatch.setattr(os, "fdopen", disk)
    with pytest.raises(OSError) as info:
        api.collect(root, write=True)
    monkeypatch.undo()
    assert info.value.errno == errno.ENOSPC and disk.opened == fail_at  # the k-th table file hit it
    now = _tables_on_disk(root)
    assert set(now) == set(old)  # no temporary file is left behind
    _frames(now)  # every file parses
    assert now == old
    read = api.results(root)
    assert read.cases.set_index("case").loc["c--m0", "status"] == "failed"  # still the old version
    api.collect(root, write=True)  # space again: the new version replaces the old one whole
    new = _tables_on_disk(root)
    assert all(new[n] != old[n] for n in new if n.startswith(("results", "cases")))
    assert api.results(root).cases.set_index("case").loc["c--m0", "status"] == "done"


@pytest.mark.parametrize("fail_at", [1, 2])
def test_disk_full_while_writing_the_uncertainty_table(collected: Path, fail_at: int,
                                                       monkeypatch: pytest.MonkeyPatch) -> None:
    root = collected
    api.assess(root)
    old = _tables_on_disk(root)
    (root / "cases" / "c--m0" / "out.json").write_text('{"q": 30}\n')
    (root / "cases" / "c--m1" / "out.json").write_text('{"q": 30.25}\n')
    (root / "cases" / "c--m2" / "out.json").write_text('{"q": 30.0625}\n')
    api.collect(root, write=True)
    before = _tables_on_disk(root)
    monkeypatch.setattr(os, "fdopen", _FullDisk(os.fdopen, fail_at))
    with pytest.raises(OSError):
        api.assess(root)
    monkeypatch.undo()
    now = _tables_on_disk(root)
    assert now == before  # both uncertainty files are the old, whole ones; nothing else changed
    assert now["uncertainty.csv"] == old["uncertainty.csv"]
    api.assess(root)
    assert _tables_on_disk(root)["uncertainty.csv"] != old["uncertainty.csv"]


def test_disk_full_at_the_command_line_is_one_clear_message(collected: Path, monkeypatch: pytest.MonkeyPatch,
                                                            capsys: pytest.CaptureFixture) -> None:
    from studyflow.cli import main

    monkeypatch.setattr(os, "fdopen", _FullDisk(os.fdopen, 1))
    try:
        code = main(["collect", str(collected)])
    finally:
        monkeypatch.undo()
    err = capsys.readouterr().err
    assert code == EXIT_SYSTEM  # documented in README and studyflow.errors
    assert code not in (EXIT_OK, EXIT_CASES_FAILED)
    assert "No space left on device" in err and "results" in err
