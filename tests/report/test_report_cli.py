"""The ``studyflow report`` verb: exit codes and what it prints."""

from __future__ import annotations

from report_synthetic import write_study

from studyflow.cli import main
from studyflow.errors import EXIT_INVALID_INPUT, EXIT_OK


def test_report_verb_writes_the_page(tmp_path, capsys):
    root = write_study(tmp_path / "s", res=[1.0e4], angles=[0.0], fields="none", failed=False, pending=False)
    out = tmp_path / "elsewhere"
    code = main(["report", str(root / "study.yaml"), "--no-fields", "-o", str(out)])
    assert code == EXIT_OK
    printed = capsys.readouterr().out
    assert f"report: {out / 'index.html'}" in printed and "3 done, 0 failed, 0 pending" in printed
    assert (out / "index.html").is_file() and (out / "tables" / "cases.csv").is_file()


def test_report_verb_names_a_missing_study(tmp_path, capsys):
    code = main(["report", str(tmp_path / "nowhere")])
    assert code == EXIT_INVALID_INPUT
    assert "nowhere" in capsys.readouterr().err
