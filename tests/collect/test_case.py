"""One case's collection: confinement to the case folder, and the state of a case's steps."""

from __future__ import annotations

import json
import os
from pathlib import Path

import pytest
from collect_fakestudy import make_study

from studyflow.collect import read_quantity
from studyflow.collect.caseinfo import case_state
from studyflow.collect.check import Bound
from studyflow.collect.readers.keyed import KeyedOptions
from studyflow.collect import registry
from studyflow.errors import StudySpecError
from studyflow.spec.quantities import QuantitySpec
from collect_support import bind_one


@pytest.fixture
def case(tmp_path: Path) -> Path:
    (tmp_path / "secret.json").write_text('{"a": 42}')
    folder = tmp_path / "case"
    folder.mkdir()
    (folder / "m.json").write_text('{"a": 1}')
    return folder


def unchecked(file: str) -> Bound:
    """A quantity that skipped the study-file check, to exercise the read-time guard on its own."""
    spec = QuantitySpec.model_construct(source="json", file=file, unit="-", series=False, description="")
    return Bound("q", spec, registry.get("json"), KeyedOptions(key="a"))


def test_escapes_refused_when_the_study_is_loaded(tmp_path: Path) -> None:
    for i, bad in enumerate(("../secret.json", "/etc/passwd", "sub/../../secret.json")):
        with pytest.raises(StudySpecError) as err:
            make_study(tmp_path / f"s{i}", quantities={"q": {"from": "json", "file": bad, "key": "a"}}, iteration=None)
        assert "quantities.q.file" in str(err.value) and repr(bad) in str(err.value)


def test_escapes_refused_when_reading(case: Path) -> None:
    for bad in ("../secret.json", str(case.parent / "secret.json")):
        r = read_quantity(case, unchecked(bad))
        assert r.status == "failed" and f"{bad}: refused: quantities.q.file" in r.reason, r.reason
    assert read_quantity(case, unchecked("m.json")).reading.final == 1.0


def test_symlink_out_of_the_case_refused_inside_allowed(case: Path) -> None:
    os.symlink(case.parent / "secret.json", case / "link.json")
    r = read_quantity(case, bind_one({"from": "json", "file": "link.json", "key": "a"}))
    assert r.status == "failed" and "link.json: refused:" in r.reason and "leaves" in r.reason
    os.symlink(case.parent, case / "up")
    r = read_quantity(case, bind_one({"from": "json", "file": "up/secret.json", "key": "a"}))
    assert r.status == "failed" and "refused" in r.reason
    os.symlink(case / "m.json", case / "inner.json")
    assert read_quantity(case, bind_one({"from": "json", "file": "inner.json", "key": "a"})).reading.final == 1.0


def test_a_fifo_is_not_read(case: Path) -> None:
    os.mkfifo(case / "pipe.json")  # reading it would block the collection
    r = read_quantity(case, bind_one({"from": "json", "file": "pipe.json", "key": "a"}))
    assert r.reason == "pipe.json: not a regular file"


def _status(folder: Path, step: str, state: str, **extra) -> None:
    d = folder / ".studyflow"
    d.mkdir(parents=True, exist_ok=True)
    (d / f"{step}.status.json").write_text(json.dumps({"state": state, **extra}))


def test_case_state_from_markers(tmp_path: Path) -> None:
    f = tmp_path / "c"
    assert case_state(f, ["solve", "post"]).reason == "not run yet"
    _status(f, "solve", "running")
    assert (case_state(f, ["solve", "post"]).status, case_state(f, ["solve", "post"]).reason) == \
        ("pending", "step solve running")
    _status(f, "solve", "ok", wall_s=2.0)
    # ok status without its done marker: the step was interrupted after writing its outputs.
    assert case_state(f, ["solve"]).status == "pending"
    (f / ".studyflow" / "solve.done").write_text("{}")  # no signature: not what the step runner writes
    assert case_state(f, ["solve"]).status == "pending"
    (f / ".studyflow" / "solve.done").write_text(json.dumps({"signature": "0" * 64}))
    assert case_state(f, ["solve"]).status == "done"
    _status(f, "post", "failed", reason="missing output summary.json", exit_code=0)
    s = case_state(f, ["solve", "post"])
    assert (s.status, s.reason, s.wall_time) == ("failed", "step post: missing output summary.json", 2.0)
    _status(f, "post", "failed", reason="timed out after 60 s", exit_code=-9)
    assert case_state(f, ["solve", "post"]).reason == "step post: timed out after 60 s (exit code -9)"
    # solve being rerun: the old post failure no longer stands.
    (f / ".studyflow" / "solve.done").unlink()
    _status(f, "solve", "running")
    assert case_state(f, ["solve", "post"]).status == "pending"


def test_fast_confinement_agrees_with_fsutil_confined(tmp_path: Path) -> None:
    # fsutil.confined (realpath based) is the reference; caseinfo.inside must refuse and resolve alike.
    from studyflow.collect.caseinfo import inside
    from studyflow.errors import UnsafePathError
    from studyflow.fsutil import confined

    root = tmp_path / "case"
    (root / "a" / "b").mkdir(parents=True)
    (root / "a" / "b" / "f.json").write_text("{}")
    (tmp_path / "out.json").write_text("{}")
    os.symlink(root / "a", root / "la")  # link inside
    os.symlink(tmp_path, root / "lout")  # link out
    os.symlink("../../..", root / "a" / "b" / "rel")  # relative link out
    os.symlink("missing-target", root / "dangling")
    paths = ["a/b/f.json", "la/b/f.json", "lout/out.json", "a/b/rel/out.json", "a/../a/b/f.json", "../out.json",
             "a/b/../../../out.json", "nothere/x.json", "dangling", ".", "a/./b//f.json", "la/../a/b/f.json",
             str(tmp_path / "out.json")]

    def outcome(fn, p):
        try:
            return str(fn(p))
        except UnsafePathError:
            return "refused"

    real = os.path.realpath(root)
    for p in paths:
        assert outcome(lambda q: inside(real, q), p) == outcome(lambda q: confined(root, q), p), p


def test_case_state_is_the_workflows_rule(tmp_path: Path) -> None:
    """Collection reads a case exactly when ``workflow.state.case_state`` calls it done (DEVELOPERS.md,
    "Case folders"), also where collection's former rule of its own said otherwise (marked *)."""
    from studyflow.workflow import state as wf

    ok = {"state": "ok", "exit_code": 0, "wall_s": 1.0}
    layouts = {
        # name: ({step: status document or raw text}, steps with a done marker)
        "both done": ({"solve": ok, "post": ok}, ("solve", "post")),
        "* marker, no status file": ({"solve": ok}, ("solve", "post")),
        "* broken status, marker": ({"solve": ok, "post": "{\"state\": "}, ("solve", "post")),
        "* foreign 'status' key": ({"solve": ok, "post": {"status": "failed", "reason": "x"}}, ("solve",)),
        "post failed": ({"solve": ok, "post": {"state": "failed", "reason": "exit code 2", "exit_code": 2}}, ("solve",)),
        "failure marker": ({"solve": {"state": "failed", "reason": "upstream"}}, ("solve",)),
        "ok, no marker": ({"solve": ok, "post": ok}, ("solve",)),
        "running": ({"solve": {"state": "running"}}, ()),
    }
    expected = {wf.DONE: "done", wf.FAILED: "failed", wf.RUNNING: "pending", wf.PENDING: "pending"}
    seen = {}
    for i, (name, (statuses, marked)) in enumerate(layouts.items()):
        f = tmp_path / f"c{i}"
        (f / ".studyflow").mkdir(parents=True)
        for step, doc in statuses.items():
            text = doc if isinstance(doc, str) else json.dumps(doc)
            (f / ".studyflow" / f"{step}.status.json").write_text(text)
        for step in marked:
            (f / ".studyflow" / f"{step}.done").write_text(json.dumps({"signature": "0" * 64}))
        ours = case_state(f, ["solve", "post"])
        assert ours.status == expected[wf.case_state(f, ["solve", "post"]).status], name
        seen[name] = ours
    assert seen["* marker, no status file"].status == "done"
    assert ("post.done", ) == tuple(s[0] for s in seen["* marker, no status file"].stamps if s[0].startswith("post"))
    assert seen["* foreign 'status' key"].reason == "step post not finished"
    assert seen["post failed"].reason == "step post: exit code 2"
    assert seen["failure marker"].reason == "step solve: upstream"
    assert seen["ok, no marker"].reason == "step post not finished"
