"""What a run makes of the engine's exit code (studyflow.workflow.run)."""

from __future__ import annotations

from pathlib import Path

import pytest

from studyflow import api
from studyflow.errors import WorkflowError

from sfstudies import steps_study


def test_engine_exit_after_every_case_finished_still_collects(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """A scheduler that cancels a job after its step recorded ok makes Snakemake exit 1 with no
    failed case: the cases' own records say done, so the run collects instead of raising."""
    import dataclasses

    from studyflow.workflow import run as run_module

    real = run_module.run_engine

    def engine_exits_1(*args, **kwargs):
        return dataclasses.replace(real(*args, **kwargs), returncode=1)

    monkeypatch.setattr(run_module, "run_engine", engine_exits_1)
    root = steps_study(tmp_path / "s", points=2)
    (root / "tpl" / "make.sh").write_text("echo '{{ a }}' > in.txt\n")
    out = api.run(root, cores=2, progress=False)
    assert out.exit_code == 0 and len(out.done) == 2
    assert set(out.tables.results["status"]) == {"done"}


def test_engine_stopping_before_the_cases_is_a_workflow_error(tmp_path: Path) -> None:
    root = steps_study(tmp_path / "s", points=2)
    with pytest.raises(WorkflowError) as info:
        api.run(root, cores=2, progress=False, extra_args=["--no-such-snakemake-option"])
    assert "Snakemake stopped with exit code" in str(info.value)
    assert "before running the cases" in str(info.value)


def test_template_error_keeps_the_last_run_log_and_leaves_no_engine_file(tmp_path: Path) -> None:
    from studyflow.errors import TemplateError

    root = steps_study(tmp_path / "s", points=2)
    api.run(root, cores=2, progress=False, collect=False)
    log = root / ".studyflow" / "run.log"
    before = log.read_bytes()
    assert b"sf_make" in before or b"sf__cases" in before  # the engine's own log of that run
    (root / "tpl" / "make.sh").write_text("echo {{ no_such_value }}\n")
    with pytest.raises(TemplateError):
        api.run(root, cores=2, progress=False)
    assert log.read_bytes() == before
    assert not (root / ".studyflow" / "run.log.next").exists()
