"""Rerun only what is stale, and a plan that says so (with the reason) before anything runs.

Executions are counted from an append-only file every step writes to, so "reran exactly these
cases" is checked against what really ran, not against what studyflow believes.
"""

from __future__ import annotations

from collections import Counter
from pathlib import Path

from studyflow import api
from studyflow.workflow.plan import NEW, STALE, UP_TO_DATE

from sfstudies import executions, table_study, write_study


def run(root: Path):
    return api.run(root, cores=2, progress=False)


def test_hundred_cases_rerun_only_stale(tmp_path: Path) -> None:
    root = table_study(tmp_path / "s", points=25, levels=4)
    all_cases = [f"p{i:02d}--m{k}" for i in range(25) for k in range(4)]

    plan = api.plan(root)
    assert plan.counts() == Counter({NEW: 100}) and plan.cases_to_run() == all_cases
    out = run(root)
    assert out.exit_code == 0 and len(out.done) == 100
    assert sorted(executions(root)) == sorted(all_cases)
    # The results table holds the known answer a*10 + nx of every case (nx = 2 * 2^level).
    res = out.tables.results
    got = dict(zip(res["case"], res["value"]))
    assert got["p07--m3"] == 7 * 10 + 16 and got["p00--m0"] == 2

    # Re-rendering an unchanged study reruns nothing.
    assert api.plan(root).cases_to_run() == []
    assert run(root).cases == []
    assert len(executions(root)) == 100

    # One parameter value of one point: exactly that point's cases, for that reason.
    text = (root / "study.yaml").read_text()
    (root / "study.yaml").write_text(text.replace("{id: p07, a: 7}", "{id: p07, a: 70}"))
    plan = api.plan(root)
    expected = [f"p07--m{k}" for k in range(4)]
    assert plan.cases_to_run() == expected
    assert {(s.case, s.state, s.reason) for s in plan.to_run()} == {(c, STALE, "parameter changed") for c in expected}
    out = run(root)
    assert [c.case for c in out.cases] == expected and len(out.done) == 4
    assert executions(root)[100:] and sorted(executions(root)[100:]) == expected
    assert dict(zip(out.tables.results["case"], out.tables.results["value"]))["p07--m3"] == 700 + 16

    # A template every case uses: all of them.
    step = root / "tpl" / "step.sh"
    step.write_text(step.read_text() + "# changed\n")
    plan = api.plan(root)
    assert plan.reasons() == Counter({"template changed": 100})
    run(root)
    assert sorted(executions(root)[104:]) == sorted(all_cases)
    assert api.plan(root).counts() == Counter({UP_TO_DATE: 100})


def test_two_steps_reasons_and_downstream(tmp_path: Path) -> None:
    root = write_study(tmp_path / "s", """\
template: tpl
parameters:
  - kind: product
    values: {a: [1, 2]}
steps:
  - {name: mesh, run: [sh, mesh.sh], reads: [mesh.sh], writes: [mesh.txt]}
  - {name: solve, run: [sh, solve.sh, "{{ a }}"], reads: [solve.sh, mesh.txt], writes: [out.txt]}
  - {name: post, run: [sh, post.sh], reads: [post.sh, out.txt], writes: [post.txt]}
""", {"mesh.sh": "echo mesh > mesh.txt; echo mesh-$PWD >> ../../runs.log\n",
      "solve.sh": "echo $1 > out.txt; echo solve-$PWD >> ../../runs.log\n",
      "post.sh": "cat out.txt > post.txt; echo post-$PWD >> ../../runs.log\n"})
    assert run(root).exit_code == 0
    assert len(executions(root)) == 6

    # Post-processing edited: only post reruns, in both cases.
    (root / "tpl/post.sh").write_text("cat out.txt out.txt > post.txt; echo post-$PWD >> ../../runs.log\n")
    plan = api.plan(root)
    assert [(s.step, s.state, s.reason) for s in plan.steps if s.case == "a1--m0"] == [
        ("mesh", UP_TO_DATE, ""), ("solve", UP_TO_DATE, ""), ("post", STALE, "template changed")]
    run(root)
    assert [e.split("-")[0] for e in executions(root)[6:]] == ["post", "post"]

    # The command of the middle step changed: it and the step after it rerun, the first does not.
    text = (root / "study.yaml").read_text().replace('"{{ a }}"]', '"{{ a }}", extra]')
    (root / "study.yaml").write_text(text)
    plan = api.plan(root)
    assert [(s.step, s.reason) for s in plan.to_run() if s.case == "a2--m0"] == [
        ("solve", "step command changed"), ("post", "upstream step rerun")]

    # A deleted output and a failed step are named too.
    (root / "study.yaml").write_text(text.replace(", extra]", "]"))
    (root / "cases/a1--m0/mesh.txt").unlink()
    plan = api.plan(root)
    assert plan.case_reason("a1--m0") == "mesh: output missing (mesh.txt)"
    (root / "tpl/solve.sh").write_text("exit 4\n")
    out = run(root)
    assert out.exit_code == 1
    assert {c.case: c.reason for c in out.failed} == {"a1--m0": "solve: exit code 4", "a2--m0": "solve: exit code 4"}
    assert api.plan(root).case_reason("a2--m0") == "solve: failed before (exit code 4)"
    # Failed cases are in the results table with their reason (collected after the run).
    cases = out.tables.cases
    assert set(cases["status"]) == {"failed"}
