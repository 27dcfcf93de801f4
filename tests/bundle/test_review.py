"""Audit of a bundle: integrity, re-render and verdict, on the invented toy study (bundle_support).

The outside reference for "identical" and "altered" is SHA-256 from ``hashlib`` and plain byte
comparison; exit codes are the documented ones in ``studyflow.errors``.
"""

from __future__ import annotations

import argparse
import json
from pathlib import Path

import pytest

from studyflow.bundle import audit, pack, safe_extract
from studyflow.bundle.text import audit_text
from studyflow.cli.bundle import register
from studyflow.design import build_design
from studyflow.errors import EXIT_AUDIT_FAILED, EXIT_OK
from studyflow.render import render_study
from studyflow.spec import load_study


def flip_byte(path: Path, offset: int = 0) -> None:
    data = bytearray(path.read_bytes())
    data[offset] ^= 0x01
    path.write_bytes(bytes(data))


def _rendered_bundle(toy, tmp_path: Path) -> Path:
    s = load_study(toy.study_file)
    render_study(s, build_design(s))
    return pack(toy.study_dir, tmp_path / "toy.tar.gz").archive


def test_rendered_bundle_audits_clean(toy, tmp_path: Path) -> None:
    archive = _rendered_bundle(toy, tmp_path)
    report = audit(archive, into=tmp_path / "review")
    assert report.ok and report.exit_code == EXIT_OK, report.failures
    assert report.phases["rerender"].detail["cases"] == 6
    # 6 cases x (case.txt, case.json, solve.step.json)
    assert report.phases["rerender"].detail["files"] == 18
    assert "verdict: PASS" in audit_text(report)


def test_flipped_template_byte_is_named_and_fails(toy, tmp_path: Path) -> None:
    archive = _rendered_bundle(toy, tmp_path)
    safe_extract(archive, tmp_path / "review")
    root = tmp_path / "review" / "toy-bundle"
    flip_byte(root / "payload/templates/toy/case.txt")
    report = audit(tmp_path / "review")
    assert not report.ok and report.exit_code == EXIT_AUDIT_FAILED
    assert "altered: payload/templates/toy/case.txt" in report.failures
    # every case input made from that template no longer re-renders to the shipped bytes
    differs = report.phases["rerender"].detail["differs"]
    assert sorted(differs) == sorted(f"payload/studies/toy/cases/{c}/case.txt"
                                     for c in ("k1--m0", "k1--m1", "k1--m2", "k2.5--m0", "k2.5--m1", "k2.5--m2"))
    text = audit_text(report)
    assert "payload/templates/toy/case.txt" in text and "verdict: FAIL" in text


def test_edited_case_input_and_stray_file_are_reported(toy, tmp_path: Path) -> None:
    archive = _rendered_bundle(toy, tmp_path)
    safe_extract(archive, tmp_path / "review")
    root = tmp_path / "review" / "toy-bundle"
    case_txt = root / "payload/studies/toy/cases/k1--m1/case.txt"
    case_txt.write_text(case_txt.read_text().replace("n = 8", "n = 9"))
    (root / "payload/studies/toy/cases/k1--m1/extra.dat").write_text("1\n")
    (root / "payload/studies/toy/cases/k1--m2/.studyflow/case.json").unlink()
    report = audit(root)
    assert "altered: payload/studies/toy/cases/k1--m1/case.txt" in report.failures
    assert "unexpected: payload/studies/toy/cases/k1--m1/extra.dat" in report.failures
    assert "missing: payload/studies/toy/cases/k1--m2/.studyflow/case.json" in report.failures
    assert report.phases["rerender"].detail["differs"] == ["payload/studies/toy/cases/k1--m1/case.txt"]
    assert report.phases["rerender"].detail["not_shipped"] == ["payload/studies/toy/cases/k1--m2/.studyflow/case.json"]


def test_cli_json_and_exit_code(toy, tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    parser = argparse.ArgumentParser(prog="studyflow")
    register(parser.add_subparsers(dest="verb"))
    s = load_study(toy.study_file)
    render_study(s, build_design(s))
    args = parser.parse_args(["pack", str(toy.study_dir), "-o", str(tmp_path / "t.tar.gz"), "--json"])
    assert args.handler(args) == EXIT_OK
    packed = json.loads(capsys.readouterr().out)
    assert Path(packed["archive"]).is_file()
    args = parser.parse_args(["audit", packed["archive"], "--into", str(tmp_path / "r"), "--json"])
    assert args.handler(args) == EXIT_OK
    out = json.loads(capsys.readouterr().out)
    assert out["verdict"] == "pass" and out["exit_code"] == 0
    assert out["manifest_sha256"] == packed["manifest_sha256"]


def test_absolute_template_path_is_stored_and_re_rendered(toy, tmp_path: Path) -> None:
    text = toy.study_file.read_text().replace("template: ../../templates/toy", f"template: {toy.template_dir}")
    toy.study_file.write_text(text)
    archive = _rendered_bundle(toy, tmp_path)
    root = tmp_path / "review" / "toy-bundle"
    report = audit(archive, into=tmp_path / "review")
    manifest = json.loads((root / "MANIFEST.json").read_text())
    assert manifest["template"]["stored"] == "payload/_templates/toy" and manifest["template"]["absolute"]
    assert (root / "payload/_templates/toy/case.txt").is_file()
    assert report.ok, report.failures
    # the re-render really used the stored copy: alter it and the case inputs differ
    flip_byte(root / "payload/_templates/toy/case.txt")
    toy.template_dir.joinpath("case.txt").unlink()  # and the original is gone from this machine
    report = audit(root)
    assert len(report.phases["rerender"].detail["differs"]) == 6


def test_cases_never_run_are_not_counted_as_reproduced(toy, tmp_path: Path) -> None:
    import subprocess
    import sys

    from studyflow.collect import collect_study, write_tables

    s = load_study(toy.study_file)
    render_study(s, build_design(s))
    subprocess.run([sys.executable, "-m", "studyflow.workflow.runstep", str(s.cases_dir / "k1--m0"), "solve"],
                   check=True)
    write_tables(s.root, collect_study(s))
    archive = pack(toy.study_dir, tmp_path / "toy.tar.gz").archive
    from studyflow.bundle import RerunChoice

    report = audit(archive, into=tmp_path / "r", rerun=RerunChoice("all"), engine="direct")
    # only the case the shipped study ran is re-run and compared
    assert report.phases["rerun"].detail["cases"] == ["k1--m0"] and report.ok, report.failures
    report = audit(tmp_path / "r", rerun=RerunChoice("cases", cases=("k1--m1",)), engine="direct")
    assert report.phases["rerun"].detail["checks"] == []
    assert [n["name"] for n in report.notes if n["what"] == "not compared"] == ["k1--m1"]


def test_time_limit_override_is_a_note_not_a_failure(toy, tmp_path: Path) -> None:
    # ``run --timeout`` renders the step records with another limit; nothing else differs
    from studyflow.render import make_renderer, render_all

    s = load_study(toy.study_file)
    d = build_design(s)
    render_study(s, d, rendered=render_all(s, d, make_renderer(s, time_limit_s=42.0)))
    report = audit(pack(toy.study_dir, tmp_path / "t.tar.gz").archive, into=tmp_path / "r")
    assert report.ok, report.failures
    assert [n["what"] for n in report.notes if n["what"] == "time limit override"] == ["time limit override"]


def test_template_inside_the_study_folder(toy, tmp_path: Path) -> None:
    import shutil

    shutil.move(str(toy.template_dir), str(toy.study_dir / "tpl"))
    toy.study_file.write_text(toy.study_file.read_text().replace("template: ../../templates/toy", "template: tpl"))
    archive = _rendered_bundle(toy, tmp_path)
    report = audit(archive, into=tmp_path / "r")
    manifest = json.loads((tmp_path / "r/toy-bundle/MANIFEST.json").read_text())
    assert manifest["template"]["stored"] == "payload/toy/tpl" and manifest["template"]["inside_study"]
    roles = {f["path"]: f["role"] for f in manifest["files"]}
    assert roles["payload/toy/tpl/case.txt"] == "template"
    assert report.ok, report.failures
