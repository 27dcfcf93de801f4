"""The command line: verbs, one clear message per error, documented exit codes."""

from __future__ import annotations

import json
import sys
from pathlib import Path

import pytest

from studyflow.cli import VERB_MODULES, main
from studyflow.errors import EXIT_CASES_FAILED, EXIT_INVALID_INPUT, EXIT_OK, EXIT_TEMPLATE
from studyflow.spec import load_study, scaffold

sys.path.insert(0, str(Path(__file__).resolve().parent / "workflow"))
from sfstudies import table_study  # noqa: E402


def test_new_copies_an_example_and_fixes_the_template_path(tmp_path: Path, monkeypatch, capsys) -> None:
    examples = tmp_path / "repo" / "studies"
    table_study(examples / "demo", points=1, levels=2)
    text = (examples / "demo/study.yaml").read_text()
    # Examples keep their templates in the repository's templates/ folder.
    (examples.parent / "templates").mkdir()
    (examples / "demo/tpl").rename(examples.parent / "templates/demo")
    (examples / "demo/study.yaml").write_text(text.replace("template: tpl", "template: ../../templates/demo  # shared"))
    monkeypatch.setattr(scaffold, "example_roots", lambda: [examples])

    assert main(["new"]) == EXIT_OK
    assert "demo" in capsys.readouterr().out
    dest = tmp_path / "mine"
    assert main(["new", "demo", str(dest)]) == EXIT_OK
    assert "template: template  # shared" in (dest / "study.yaml").read_text()
    assert load_study(dest).template_dir == (dest / "template").resolve()
    assert main(["new", "nope", str(tmp_path / "x")]) == EXIT_INVALID_INPUT
    err = capsys.readouterr().err
    assert err == "studyflow: error: studyflow new: example: no such example (known: demo) (got 'nope')\n"


def test_invalid_study_is_one_message_and_exit_3(tmp_path: Path, capsys) -> None:
    root = table_study(tmp_path / "s", points=1, levels=1)
    (root / "study.yaml").write_text((root / "study.yaml").read_text().replace("ratio: 2", "ratio: 0.5"))
    for verb in ("check", "plan", "run", "status"):
        assert main([verb, str(root)]) == EXIT_INVALID_INPUT
        err = capsys.readouterr().err
        assert err.startswith(f"studyflow: error: {root / 'study.yaml'}: 1 problem in the study file\n")
        assert "mesh.ratio: every refinement ratio must be greater than 1 (got 0.5)" in err
    assert not (root / "cases").exists()


def test_template_error_exit_4(tmp_path: Path, capsys) -> None:
    root = table_study(tmp_path / "s", points=1, levels=1)
    (root / "tpl/in.txt").write_text("{{ b }}\n")
    assert main(["run", str(root), "--quiet"]) == EXIT_TEMPLATE
    assert capsys.readouterr().err == (f"studyflow: error: {root / 'tpl/in.txt'}:1: unknown variable 'b' "
                                       f"(case p00--m0)\n")


def test_plan_run_status_collect(tmp_path: Path, capsys) -> None:
    root = table_study(tmp_path / "s", points=2, levels=1)
    assert main(["plan", str(root)]) == EXIT_OK
    out = capsys.readouterr().out
    assert out.splitlines()[:3] == ["2 cases, 2 steps: 2 new, 0 stale, 0 up to date", "2 case(s) to run", "why:"]
    assert main(["run", str(root), "--dry"]) == EXIT_OK
    assert not (root / "runs.log").exists()
    # One case fails: the sweep goes on, the exit code says so, the reason is shown.
    (root / "tpl/step.sh").write_text('[ "{{ point }}" = p01 ] && exit 9\n' + (root / "tpl/step.sh").read_text())
    assert main(["run", str(root), "-j", "2", "--quiet", "--", "--printshellcmds"]) == EXIT_CASES_FAILED
    out = capsys.readouterr().out
    assert "ran 2 case(s): 1 done, 1 failed" in out
    assert "failed  p01--m0  solve: exit code 9" in out
    assert "Verification is not validation" in out
    assert main(["status", str(root)]) == EXIT_OK
    out = capsys.readouterr().out
    assert out.splitlines()[0] == "s: 2 cases: 1 done, 1 failed, 0 running, 0 interrupted, 0 pending"
    assert "failed  p01--m0  solve: exit code 9" in out
    assert main(["collect", str(root)]) == EXIT_OK
    assert (root / "results/results.csv").exists()


def test_schema_and_usage(capsys) -> None:
    assert main(["schema"]) == EXIT_OK
    schema = json.loads(capsys.readouterr().out)
    assert "steps" in schema["properties"]
    assert main([]) == 2
    with pytest.raises(SystemExit) as info:
        main(["run"])  # missing study argument: argparse's usage error
    assert info.value.code == 2
    assert VERB_MODULES[:3] == ("study", "run", "collect")


def test_bad_batch_option_is_a_usage_error_naming_the_value(tmp_path: Path, capsys) -> None:
    root = table_study(tmp_path / "s", points=1, levels=1)
    with pytest.raises(SystemExit) as info:
        main(["run", str(root), "--batch", "lots"])
    assert info.value.code == 2
    err = capsys.readouterr().err
    assert "--batch must be auto, off or a whole number of cases per job (got 'lots')" in err
    assert not (root / "cases").exists()


def test_run_with_batches_from_the_command_line(tmp_path: Path, capsys) -> None:
    root = table_study(tmp_path / "s", points=5, levels=1)
    assert main(["run", str(root), "--batch", "2", "--quiet", "--cores", "2"]) == EXIT_OK
    assert "ran 5 case(s): 5 done, 0 failed" in capsys.readouterr().out
    assert json.loads((root / ".studyflow" / "run.json").read_text())["batches"] == 3
