"""The step runner: status files, reasons, time limit, done marker only after checked outputs."""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from studyflow.design import build_design
from studyflow.render import render_study
from studyflow.spec import load_study
from studyflow.workflow import signature as sig

from sfstudies import write_study

REPO = Path(__file__).resolve().parents[2]


def one_step(tmp_path: Path, run: str, writes: str = "[out.txt]", limit: str = "", reads: str = "[]") -> Path:
    root = write_study(tmp_path / "s", f"""\
template: tpl
steps:
  - name: solve
    run: {run}
    reads: {reads}
    writes: {writes}
{limit}""", {"input.txt": "x\n"})
    s = load_study(root)
    render_study(s, build_design(s))
    return root / "cases" / "base--m0"


def runstep(case: Path, step: str = "solve", **kw) -> subprocess.CompletedProcess:
    env = {**os.environ, "PYTHONPATH": str(REPO)}
    return subprocess.run([sys.executable, "-m", "studyflow.workflow.runstep", str(case), step],
                          env=env, capture_output=True, text=True, timeout=60, **kw)


def status(case: Path) -> dict:
    return json.loads((case / ".studyflow/solve.status.json").read_text())


def test_success_writes_log_status_and_marker(tmp_path: Path) -> None:
    case = one_step(tmp_path, "[sh, -c, 'echo hello; echo 1 > out.txt']", reads="[input.txt]")
    assert runstep(case).returncode == 0
    st = status(case)
    assert (st["state"], st["reason"], st["exit_code"]) == ("ok", None, 0)
    assert (case / "logs/solve.log").read_text() == "hello\n"
    marker = json.loads((case / ".studyflow/solve.done").read_text())
    doc = json.loads((case / ".studyflow/solve.step.json").read_text())
    # The marker's signature is the documented combination of its parts (signature.py).
    shas = {"input.txt": sig.sha_file(str(case / "input.txt"))}
    assert marker["reads"]["input.txt"]["sha"] == shas["input.txt"]
    assert marker["signature"] == sig.signature(sig.command_hash(doc), shas, None)


@pytest.mark.parametrize("run,writes,reason", [
    ("[sh, -c, 'exit 3']", "[]", "exit code 3"),
    # the program's last non-empty line of output joins the exit code, e.g. a mesher's own error
    ("[sh, -c, 'echo starting; echo \"radius must be positive\" >&2; echo; exit 2']", "[]",
     "exit code 2: radius must be positive"),
    ("[sh, -c, 'true']", "[out.txt]", "missing output out.txt"),
    ("[no-such-program-xyz]", "[]", "cannot start: No such file or directory"),
])
def test_failures_carry_a_reason(tmp_path: Path, run: str, writes: str, reason: str) -> None:
    case = one_step(tmp_path, run, writes)
    assert runstep(case).returncode == 1
    assert status(case)["state"] == "failed" and status(case)["reason"] == reason
    assert not (case / ".studyflow/solve.done").exists()


def test_time_limit_kills_the_step(tmp_path: Path) -> None:
    case = one_step(tmp_path, "[sh, -c, 'sleep 30; echo late > out.txt']", limit="resources: {time_min: 0.01}")
    t0 = time.time()
    assert runstep(case).returncode == 1
    assert time.time() - t0 < 20  # 0.6 s limit plus start-up, not the 30 s of the command
    assert status(case)["reason"] == "timed out after 0.6 s"
    assert not (case / "out.txt").exists()


def test_stale_output_removed_before_the_step_runs(tmp_path: Path) -> None:
    case = one_step(tmp_path, "[sh, -c, 'test -f marker.txt && echo 1 > out.txt; true']")
    (case / "out.txt").write_text("from an earlier run\n")
    assert runstep(case).returncode == 1
    assert status(case)["reason"] == "missing output out.txt"


def test_sigint_records_interrupted(tmp_path: Path) -> None:
    case = one_step(tmp_path, "[sh, -c, 'sleep 30']", writes="[]")
    env = {**os.environ, "PYTHONPATH": str(REPO)}
    proc = subprocess.Popen([sys.executable, "-m", "studyflow.workflow.runstep", str(case), "solve"], env=env,
                            start_new_session=True)
    deadline = time.time() + 30
    while time.time() < deadline and not (case / "logs/solve.log").exists():
        time.sleep(0.05)
    time.sleep(0.3)
    os.killpg(proc.pid, signal.SIGINT)  # the whole group, as a Ctrl-C would
    assert proc.wait(timeout=30) == 130
    assert status(case)["reason"] == "interrupted"
    assert not (case / ".studyflow/solve.done").exists()


def test_upstream_not_done(tmp_path: Path) -> None:
    root = write_study(tmp_path / "s", """\
template: tpl
steps:
  - {name: mesh, run: [sh, -c, 'echo m > mesh.txt'], writes: [mesh.txt]}
  - {name: solve, run: [cat, mesh.txt], reads: [mesh.txt]}
""", {"a.txt": "a"})
    s = load_study(root)
    render_study(s, build_design(s))
    case = root / "cases/base--m0"
    assert runstep(case, "solve").returncode == 1
    assert status(case)["reason"] == "upstream step mesh not done"
