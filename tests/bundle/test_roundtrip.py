"""Round trip on a run study: pack, audit elsewhere, tamper, re-run with the same or a new solver.

The toy study (bundle_support) is an invented demo; its solver's answer phi = k (1 + h^2 / 2) is
analytic, so "reproduced" means the re-run printed the same 17 significant digits. Integrity is
judged with SHA-256 (``hashlib``); tolerances follow ``numpy.isclose`` (checked below against
numpy itself).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from bundle_support import use_solver

from studyflow.bundle import RerunChoice, audit, safe_extract
from studyflow.bundle.text import audit_text
from studyflow.bundle.tolerances import close
from studyflow.errors import EXIT_AUDIT_FAILED, EXIT_OK


def flip_byte(path: Path, offset: int = 0) -> None:
    data = bytearray(path.read_bytes())
    data[offset] ^= 0x01
    path.write_bytes(bytes(data))


def test_shipped_study_really_ran(packed_toy) -> None:
    # guards every test below against passing on a study whose cases all failed
    results = pd.read_csv(packed_toy.toy.study_dir / "results/results.csv")
    assert set(results["status"]) == {"done"}
    drag = results[(results["quantity"] == "drag")].set_index("case")["value"]
    # analytic answer of the toy solver: phi = k (1 + 0.5 h^2), h = 1/n, n = 4, 8, 16
    assert drag["k2.5--m2"] == pytest.approx(2.5 * (1 + 0.5 / 16**2), rel=1e-15)


def test_round_trip_in_another_folder_is_clean(packed_toy, tmp_path: Path, monkeypatch) -> None:
    use_solver(monkeypatch, tmp_path / "bin", "1.0.0")
    # the full re-run goes through the workflow engine, as the study's own run did
    report = audit(packed_toy.archive, into=tmp_path / "elsewhere", rerun=RerunChoice("all"), jobs=2)
    assert report.ok and report.exit_code == EXIT_OK, report.failures
    assert not [n for n in report.notes if n["what"] == "solver version"]
    checks = report.phases["rerun"].detail["checks"]
    # 6 cases x (drag scalar + res final value in the results table + res at every iteration)
    assert len(checks) == 18 and all(c["ok"] for c in checks)
    assert sorted({c["kind"] for c in checks}) == ["history", "iterations", "scalar"]
    # the uncertainty table re-computes from the shipped results, every row of it
    unc = report.phases["uncertainty"]
    shipped = pd.read_parquet(packed_toy.toy.study_dir / "results/uncertainty.parquet")
    assert {("k1", "drag"), ("k2.5", "drag")} <= set(zip(shipped["point"], shipped["quantity"]))
    assert unc.ran and unc.ok and unc.detail["comparison"]["rows_shipped"] == len(shipped)


@pytest.mark.parametrize("member", [
    "payload/studies/toy/cases/k1--m1/logs/solve.log",
    "payload/studies/toy/results/results.csv",
    "payload/templates/toy/case.txt",
])
def test_one_flipped_byte_is_named_and_fails(packed_toy, tmp_path: Path, monkeypatch, member: str) -> None:
    use_solver(monkeypatch, tmp_path / "bin", "1.0.0")
    safe_extract(packed_toy.archive, tmp_path / "review")
    root = tmp_path / "review" / "toy-bundle"
    flip_byte(root / member, offset=3)
    report = audit(tmp_path / "review")
    assert report.exit_code == EXIT_AUDIT_FAILED
    assert f"altered: {member}" in report.failures
    assert report.phases["integrity"].detail["altered"][0]["path"] == member
    assert member in audit_text(report) and "verdict: FAIL" in audit_text(report)


def test_sampled_rerun_is_reproducible_by_seed(packed_toy, tmp_path: Path, monkeypatch) -> None:
    use_solver(monkeypatch, tmp_path / "bin", "1.0.0")
    a = audit(packed_toy.archive, into=tmp_path / "a", rerun=RerunChoice("sample", n=2, seed=7),
              engine="direct")
    b = audit(tmp_path / "a", rerun=RerunChoice("sample", n=2, seed=7), engine="direct")
    assert a.ok and b.ok, (a.failures, b.failures)
    assert a.phases["rerun"].detail["cases"] == b.phases["rerun"].detail["cases"]
    assert len(a.phases["rerun"].detail["cases"]) == 2
    assert {c["case"] for c in a.phases["rerun"].detail["checks"]} == set(a.phases["rerun"].detail["cases"])


def test_changed_solver_version_is_reported_as_such(packed_toy, tmp_path: Path, monkeypatch) -> None:
    use_solver(monkeypatch, tmp_path / "bin", "2.0.0")
    report = audit(packed_toy.archive, into=tmp_path / "r", rerun=RerunChoice("cases", cases=("k1--m2",)),
                   engine="direct")
    notes = [n for n in report.notes if n["what"] == "solver version"]
    assert notes == [{"what": "solver version", "name": "toysolve", "packed": "1.0.0", "now": "2.0.0",
                      "error_now": None}]
    assert "solver version changed: toysolve 1.0.0 when packed, 2.0.0 now" in audit_text(report)
    # same numerics in the new release: the numbers still reproduce, so the verdict passes
    assert report.ok, report.failures


def test_new_release_with_other_numbers_fails_outside_tolerance(packed_toy, tmp_path: Path, monkeypatch) -> None:
    # 1e-6 relative change against the study's declared rtol of 1e-9 for drag
    use_solver(monkeypatch, tmp_path / "bin", "2.1.0", scale="1.000001")
    report = audit(packed_toy.archive, into=tmp_path / "r", rerun=RerunChoice("cases", cases=("k2.5--m0",)),
                   engine="direct")
    assert report.exit_code == EXIT_AUDIT_FAILED
    bad = [c for c in report.phases["rerun"].detail["checks"] if not c["ok"]]
    assert [(c["case"], c["quantity"]) for c in bad] == [("k2.5--m0", "drag")]
    assert bad[0]["max_rel_diff"] == pytest.approx(1e-6, rel=1e-6)


@pytest.mark.parametrize("new, old, rtol, atol", [
    (1.0 + 1e-7, 1.0, 1e-6, 0.0), (1.0 + 1e-5, 1.0, 1e-6, 0.0), (1e-13, 0.0, 1e-6, 1e-12),
    (2e-12, 0.0, 1e-6, 1e-12), (-3.0, -3.0000030, 1e-6, 0.0), (np.inf, np.inf, 1e-6, 0.0),
])
def test_tolerance_matches_numpy_isclose(new: float, old: float, rtol: float, atol: float) -> None:
    # reference: numpy.isclose(a, b, rtol, atol) tests |a - b| <= atol + rtol * |b|
    assert close(new, old, rtol, atol) == bool(np.isclose(new, old, rtol=rtol, atol=atol))


def test_consistently_forged_uncertainty_is_caught_by_recomputation(packed_toy, tmp_path: Path, monkeypatch) -> None:
    # a forger who edits the table AND its manifest hashes passes the hash check; re-assessing
    # the shipped results does not agree with the edited number
    import hashlib
    import json

    safe_extract(packed_toy.archive, tmp_path / "review")
    root = tmp_path / "review" / "toy-bundle"
    results = root / "payload/studies/toy/results"
    table = pd.read_parquet(results / "uncertainty.parquet")
    row = table.index[(table["point"] == "k2.5") & (table["quantity"] == "drag")][0]
    table.loc[row, "U"] = table.loc[row, "U"] * 0.5
    table.to_parquet(results / "uncertainty.parquet", index=False)
    table.to_csv(results / "uncertainty.csv", index=False, float_format="%.17g")
    manifest = json.loads((root / "MANIFEST.json").read_text())
    for f in manifest["files"]:
        if f["path"].endswith(("uncertainty.parquet", "uncertainty.csv")):
            blob = (root / f["path"]).read_bytes()
            f["sha256"], f["size"] = hashlib.sha256(blob).hexdigest(), len(blob)
    (root / "MANIFEST.json").write_text(json.dumps(manifest))
    report = audit(root)
    assert report.phases["integrity"].ok
    assert not report.phases["uncertainty"].ok and report.exit_code == EXIT_AUDIT_FAILED
    # and the digest the packer sent separately no longer matches the rewritten manifest
    import tarfile

    with tarfile.open(packed_toy.archive) as tf:
        sent = hashlib.sha256(tf.extractfile("toy-bundle/MANIFEST.json").read()).hexdigest()
    report = audit(root, manifest_sha256=sent)
    assert any(f.startswith("manifest digest") and sent in f for f in report.failures)
    diffs = report.phases["uncertainty"].detail["comparison"]["differences"]
    assert [(d["row"]["point"], d["row"]["quantity"], d["column"]) for d in diffs] == [("k2.5", "drag", "U")]


def test_relative_paths_from_the_command_line(packed_toy, tmp_path: Path, monkeypatch) -> None:
    import shutil

    shutil.copy2(packed_toy.archive, tmp_path / "b.tar.gz")
    monkeypatch.chdir(tmp_path)
    report = audit("b.tar.gz", into="review")
    assert report.ok, report.failures
    assert report.phases["uncertainty"].ran
