"""Local batches of cases per Snakemake job (studyflow.workflow.batches and runbatch)."""

from __future__ import annotations

import json
from collections import Counter
from pathlib import Path

import pytest

from studyflow import api
from studyflow.errors import EXIT_CASES_FAILED, WorkflowError
from studyflow.workflow import batches

from sfstudies import executions, status, steps_study, write_study


# --- choosing and dealing batches ------------------------------------------------------------

@pytest.mark.parametrize("value, parsed", [("auto", "auto"), ("OFF", "off"), ("25", 25), (3, 3)])
def test_batch_setting_values(value: object, parsed: object) -> None:
    assert batches.parse_setting(value) == parsed


@pytest.mark.parametrize("value, message", [
    ("0", "--batch must be at least 1 case per job (got 0)"),
    ("many", "--batch must be auto, off or a whole number of cases per job (got 'many')"),
    (True, "--batch must be auto, off or a whole number of cases per job (got True)"),
])
def test_bad_batch_setting_names_option_and_value(value: object, message: str) -> None:
    with pytest.raises(WorkflowError) as info:
        batches.parse_setting(value, "--batch")
    assert str(info.value) == message


@pytest.mark.parametrize("cases, cores, setting, count", [
    (16, 2, "auto", 0),  # 8 cases per core or fewer: one job per step
    (17, 2, "auto", 16),  # 8 batches per core
    (1000, 2, "auto", 16),
    (10_000, 2, "auto", 100),  # at most 100 cases per batch
    (10, 2, 3, 4),
    (10, 2, "off", 0),
    (0, 2, "auto", 0),
])
def test_batch_count(cases: int, cores: int, setting: object, count: int) -> None:
    assert batches.batch_count(cases, cores, setting) == count


def test_longest_processing_time_on_grahams_tight_example() -> None:
    """Graham (SIAM J. Appl. Math. 17, 1969) shows the longest-processing-time rule can miss the
    best split by a factor 4/3 - 1/(3m); on two machines his instance is jobs 3, 3, 2, 2, 2
    (from memory of the paper's example): the rule gives loads 7 and 5 where 6 and 6 exist."""
    costs = {"a": 3, "b": 3, "c": 2, "d": 2, "e": 2}
    got = batches.deal(list(costs), 2, costs)
    loads = sorted(sum(costs[c] for c in b) for b in got)
    assert loads == [5, 7]
    assert sorted(c for b in got for c in b) == sorted(costs)


def test_fine_meshes_spread_over_the_batches() -> None:
    """Three mesh levels of ratio 2 in 2D (cells 1, 4, 16 per point), 12 points, 6 batches: every
    batch gets two fine meshes, and cases keep their design order inside a batch."""
    cases = [f"p{i:02d}--m{k}" for i in range(12) for k in range(3)]
    costs = {c: 4.0 ** int(c[-1]) for c in cases}
    got = batches.deal(cases, 6, costs)
    assert [sum(c.endswith("m2") for c in b) for b in got] == [2] * 6
    assert {sum(costs[c] for c in b) for b in got} == {42.0}
    assert all(b == sorted(b, key=cases.index) for b in got)


# --- batched runs ----------------------------------------------------------------------------

def test_batched_run_records_each_failure_and_reruns_only_what_changed(tmp_path: Path) -> None:
    root = steps_study(tmp_path / "s", points=7)
    out = api.run(root, cores=2, progress=False, batch=2)
    assert out.engine.batches == 4
    assert out.exit_code == EXIT_CASES_FAILED
    assert [c.case for c in out.failed] == ["p03--m0"]
    assert out.failed[0].reason == "make: exit code 4: mesher: no cells"
    assert len(out.done) == 6
    runs = Counter(executions(root))
    assert runs["make"] == 7 and runs["post"] == 6  # the failed case's later step did not run
    assert not (root / ".studyflow" / "batches").exists()  # batch files live for one run only
    res = out.tables.results
    assert dict(zip(res["case"], res["value"]))["p05--m0"] == 5

    # a changed post-processing step reruns post-processing only, in batches as without
    post = root / "tpl" / "post.sh"
    post.write_text(post.read_text().replace("$a}", "$a, \\\"x\\\": 1}"))
    (root / "runs.log").unlink()
    out = api.run(root, cores=2, progress=False, batch=2)
    again = Counter(executions(root))
    assert again["post"] == 6 and again["make"] == 1  # p03 failed before: only its make reruns
    assert [c.case for c in out.failed] == ["p03--m0"]


def test_batched_retries_rerun_a_failed_step(tmp_path: Path) -> None:
    root = write_study(tmp_path / "s", """\
title: flaky
template: tpl
parameters:
  - kind: table
    points: [{id: a, x: 1}, {id: b, x: 2}, {id: c, x: 3}]
steps:
  - name: solve
    run: [sh, flaky.sh]
    reads: [flaky.sh]
    writes: [out.txt]
retries: 1
""", {"flaky.sh": "if [ ! -e tried ]; then touch tried; exit 9; fi\necho ok > out.txt\n"})
    out = api.run(root, cores=2, progress=False, collect=False, batch=3)
    assert out.engine.batches == 1
    assert out.exit_code == 0 and len(out.done) == 3


def test_batched_stop_on_failure_starts_no_new_case(tmp_path: Path) -> None:
    root = steps_study(tmp_path / "s", points=7)
    out = api.run(root, cores=1, progress=False, collect=False, batch=7, keep_going=False)
    assert out.exit_code == EXIT_CASES_FAILED
    states = Counter(c.status for c in out.cases)
    assert states == Counter({"done": 3, "failed": 1, "pending": 3})  # p00-p02 done, p03 failed
    assert status(root, "p03--m0", "make")["reason"] == "exit code 4: mesher: no cells"


def test_batch_file_problem_is_a_clear_error(tmp_path: Path) -> None:
    from studyflow.workflow import runbatch

    bad = tmp_path / "b00000.json"
    bad.write_text("{not json")
    assert runbatch.run(str(bad)) == runbatch.EXIT_BAD_BATCH
    bad.write_text(json.dumps({"cases": []}))
    assert runbatch.run(str(bad)) == runbatch.EXIT_BAD_BATCH
    assert not (tmp_path / "b00000.done").exists()

