"""Packing: what goes into a bundle, the template mapping, determinism and ``--no-fields``."""

from __future__ import annotations

import hashlib
import json
import tarfile
from pathlib import Path

import pytest

from studyflow.bundle import pack
from studyflow.design import build_design
from studyflow.errors import InputError
from studyflow.render import render_study
from studyflow.spec import load_study


def _render(toy) -> None:
    s = load_study(toy.study_file)
    render_study(s, build_design(s))


def test_bundle_keeps_template_position_and_hashes(toy, tmp_path: Path) -> None:
    _render(toy)
    (toy.study_dir / "cases/k1--m0/fields.vtu").write_text("<VTKFile/>\n")
    result = pack(toy.study_dir, tmp_path / "b.tar.gz")
    with tarfile.open(result.archive) as tf:
        names = tf.getnames()
        manifest = json.load(tf.extractfile("toy-bundle/MANIFEST.json"))
        members = {m.name: m for m in tf.getmembers()}
        data = {n: tf.extractfile(n).read() for n in names if members[n].isfile()}
    # the manifest comes first so a reviewer can read it without unpacking the rest
    assert names[0] == "toy-bundle/MANIFEST.json"
    assert names[1:] == sorted(names[1:])
    # template folder lives outside the study folder: stored at the same relative position
    assert manifest["template"] == {"declared": "../../templates/toy", "stored": "payload/templates/toy",
                                    "inside_study": False, "absolute": False}
    assert "toy-bundle/payload/templates/toy/case.txt" in names
    assert manifest["study_file"] == "payload/studies/toy/study.yaml"
    # every file but the manifest is listed with its SHA-256 (checked with hashlib) and size
    listed = {f["path"]: f for f in manifest["files"]}
    assert set(listed) == {n.removeprefix("toy-bundle/") for n in names} - {"MANIFEST.json"}
    for path, f in listed.items():
        blob = data["toy-bundle/" + path]
        assert f["sha256"] == hashlib.sha256(blob).hexdigest() and f["size"] == len(blob)
    assert listed["payload/studies/toy/cases/k1--m0/fields.vtu"]["role"] == "field"
    assert listed["payload/studies/toy/study.yaml"]["role"] == "study-file"
    # the rendered template output is told apart from the case's other files
    assert listed["payload/studies/toy/cases/k1--m0/case.txt"]["role"] == "case-input"
    assert listed["payload/studies/toy/cases/k1--m0/.studyflow/case.json"]["role"] == "case-state"
    # fixed owner and one timestamp for every member
    assert {(m.uid, m.gid, m.uname, m.gname) for m in members.values()} == {(0, 0, "", "")}
    assert len({m.mtime for m in members.values()}) == 1
    env = json.loads(data["toy-bundle/environment.json"])
    assert env["solvers"]["toysolve"]["version"] == "1.0.0"
    assert env["python"]["version"] and env["packages"]


def test_same_study_packs_to_same_bytes(toy, tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    # SOURCE_DATE_EPOCH: the reproducible-builds convention for a fixed build time
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1700000000")
    _render(toy)
    a = pack(toy.study_dir, tmp_path / "a.tar.gz")
    b = pack(toy.study_dir, tmp_path / "b.tar.gz")
    assert a.archive.read_bytes() == b.archive.read_bytes()


def test_no_fields_leaves_field_files_out(toy, tmp_path: Path) -> None:
    _render(toy)
    (toy.study_dir / "cases/k1--m0/fields.vtu").write_text("<VTKFile/>\n")
    result = pack(toy.study_dir, tmp_path / "b.tar.gz", fields=False)
    with tarfile.open(result.archive) as tf:
        assert not any(n.endswith(".vtu") for n in tf.getnames())
        manifest = json.load(tf.extractfile("toy-bundle/MANIFEST.json"))
    assert manifest["options"] == {"fields": False}
    assert {"path": "payload/studies/toy/cases/k1--m0/fields.vtu", "why": "field file (--no-fields)"} \
        in manifest["skipped"]


def test_bad_audit_block_is_refused_with_key(toy, tmp_path: Path) -> None:
    text = toy.study_file.read_text().replace("rtol: 1.0e-9", "rtol: -1")
    toy.study_file.write_text(text)
    with pytest.raises(InputError, match=r"audit\.rtol.*-1"):
        pack(toy.study_dir, tmp_path / "b.tar.gz")
    assert not (tmp_path / "b.tar.gz").exists()


def test_pack_refuses_while_a_run_holds_the_study(toy, tmp_path: Path) -> None:
    from studyflow.errors import EXIT_BUSY, StudyBusyError
    from studyflow.workflow.lock import RunLock

    _render(toy)
    with RunLock(toy.study_dir / ".studyflow"), pytest.raises(StudyBusyError) as info:
        pack(toy.study_dir, tmp_path / "b.tar.gz")
    assert info.value.exit_code == EXIT_BUSY and not (tmp_path / "b.tar.gz").exists()
    assert pack(toy.study_dir, tmp_path / "b.tar.gz").archive.is_file()


def test_audit_block_naming_an_unknown_quantity_is_refused(toy, tmp_path: Path) -> None:
    text = toy.study_file.read_text().replace("per_quantity: {res: {rtol: 1.0e-6}}",
                                              "per_quantity: {res: {rtol: 1.0e-6}}\n  ignore: [wall_tme]")
    toy.study_file.write_text(text)
    with pytest.raises(InputError, match=r"audit\.ignore\[0\].*no quantity 'wall_tme'"):
        pack(toy.study_dir, tmp_path / "b.tar.gz")


def test_pack_warns_about_step_files_outside_the_bundle(toy, tmp_path: Path) -> None:
    helper = toy.base / "tools" / "extra.awk"
    helper.parent.mkdir()
    helper.write_text("BEGIN { }\n")
    text = toy.study_file.read_text().replace('run: "toysolve case.txt"',
                                              'run: "toysolve case.txt ../../../../tools/extra.awk"')
    toy.study_file.write_text(text)
    _render(toy)
    result = pack(toy.study_dir, tmp_path / "b.tar.gz")
    assert any(str(helper) in w and "outside the study" in w for w in result.warnings)
