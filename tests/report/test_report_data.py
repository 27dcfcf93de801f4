"""The case states the report shows follow the workflow's own rule (DEVELOPERS.md, "Case folders":
a case is done when every step has its done marker), where the report's former rule of its own
(status files only) said otherwise."""

from __future__ import annotations

import json
from pathlib import Path

import pandas as pd

from studyflow.collect.caseinfo import case_state as collect_state
from studyflow.report.data import load, scan_cases
from studyflow.workflow.state import DONE, case_state

STEPS = ["mesh", "solve"]


def write_case(root: Path, case: str, *, status: dict[str, dict] | None = None, done: tuple[str, ...] = (),
               rendered: tuple[str, ...] = ()) -> Path:
    """A case folder in the layout of DEVELOPERS.md: case.json, rendered step files, status files
    as the step runner writes them, and done markers."""
    state = root / "cases" / case / ".studyflow"
    state.mkdir(parents=True, exist_ok=True)
    (state / "case.json").write_text(json.dumps({"case": case, "point": case.split("--")[0], "level": 0,
                                                 "params": {}, "mesh": {"level": 0, "h": 0.1}}))
    for i, step in enumerate(rendered):
        (state / f"{step}.step.json").write_text(json.dumps({"step": step, "index": i, "argv": ["true"]}))
    for step, doc in (status or {}).items():
        (state / f"{step}.status.json").write_text(json.dumps({"case": case, "step": step, "reason": None, **doc}))
    for step in done:
        (state / f"{step}.done").write_text(json.dumps({"signature": "0" * 64}))
    return state.parent


OK = {"state": "ok", "exit_code": 0, "wall_s": 1.5}


def test_status_ok_without_done_marker_is_pending_as_for_the_workflow(tmp_path: Path) -> None:
    # Every status file says ok, but the last step never got its done marker (the runner was
    # stopped between the two writes). The old report rule called this case done.
    folder = write_case(tmp_path, "a--m0", status={"mesh": OK, "solve": OK}, done=("mesh",))
    state = scan_cases(tmp_path, STEPS)["a--m0"]
    assert state.status == "pending"
    assert state.reason == "solve: ended without its done marker; the next run repeats it"
    assert state.wall_time == 3.0  # both steps' recorded wall times
    # the workflow (which will run the step again) and the collection (which will not read it) agree
    assert case_state(folder, STEPS).status != DONE
    assert collect_state(folder, STEPS).status == "pending"
    (folder / ".studyflow" / "solve.done").write_text(json.dumps({"signature": "1" * 64}))
    assert scan_cases(tmp_path, STEPS)["a--m0"].status == "done"


def test_an_old_failure_behind_a_step_being_rerun_is_not_shown(tmp_path: Path) -> None:
    # solve failed last time; mesh is being run again now, so the failure no longer stands.
    write_case(tmp_path, "b--m0", status={"mesh": {"state": "running"},
                                          "solve": {"state": "failed", "reason": "exit code 3", "exit_code": 3}})
    state = scan_cases(tmp_path, STEPS)["b--m0"]
    assert (state.status, state.reason) == ("pending", "mesh: running")  # the old rule said failed


def test_failed_cases_keep_their_reason(tmp_path: Path) -> None:
    write_case(tmp_path, "c--m0", status={"mesh": OK, "solve": {"state": "failed", "reason": "missing output f.vtu",
                                                                "exit_code": 0, "wall_s": 0.5}}, done=("mesh",))
    # a failure recorded without a reason, with the failure marker a cluster batch leaves
    write_case(tmp_path, "d--m0", status={"mesh": {"state": "failed", "exit_code": 1}})
    (tmp_path / "cases" / "d--m0" / ".studyflow" / "mesh.done").write_text(json.dumps({"failed": True}))
    cases = scan_cases(tmp_path, STEPS)
    assert (cases["c--m0"].status, cases["c--m0"].reason, cases["c--m0"].wall_time) == \
        ("failed", "solve: missing output f.vtu", 2.0)
    assert (cases["d--m0"].status, cases["d--m0"].reason, cases["d--m0"].wall_time) == ("failed", "mesh: failed", None)


def test_without_a_study_file_the_rendered_steps_decide(tmp_path: Path) -> None:
    # No study.yaml, so no declared steps. The old rule took whatever status files were there: one
    # ok step of two rendered ones was "done". Now the case's rendered steps are the steps.
    write_case(tmp_path, "e--m0", rendered=("mesh", "solve"), status={"mesh": OK}, done=("mesh",))
    write_case(tmp_path, "f--m0", rendered=("mesh", "solve"), status={"mesh": OK, "solve": OK}, done=("mesh", "solve"))
    write_case(tmp_path, "g--m0")  # nothing rendered: nothing says the case is done
    data = load(tmp_path)
    assert data.settings.steps == []
    assert {c: s.status for c, s in data.cases.items()} == {"e--m0": "pending", "f--m0": "done", "g--m0": "pending"}
    assert data.cases["g--m0"].wall_time is None  # no status recorded is no wall time, not 0 s


def test_a_partly_collected_study_reads_each_table_with_the_collection_reader(tmp_path: Path) -> None:
    write_case(tmp_path, "3--m0", status={"mesh": OK, "solve": OK}, done=("mesh", "solve"))
    out = tmp_path / "results"
    out.mkdir()
    # only the cases table so far; the point id "3" stays text and the level is a whole number
    (out / "cases.csv").write_text("study,case,point,level,status,reason,wall_time\ns,3--m0,3,0,done,,3.0\n")
    data = load(tmp_path)
    assert data.results is None and data.histories is None and data.uncertainty is None
    assert data.table_files == {"cases": out / "cases.csv"}
    assert data.cases_table["point"].tolist() == ["3"] and data.cases_table["reason"].tolist() == [""]
    assert str(data.cases_table["level"].dtype) == "Int64"
    assert isinstance(data.cases_table, pd.DataFrame)
