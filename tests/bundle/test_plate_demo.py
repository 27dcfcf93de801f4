"""Round trip of the bundled flat-plate demo (studies/plate-drag, studyflow-fv): pack, audit in
another folder, re-run the coarsest case, re-compute the uncertainty table.

The drag of the run is checked against Blasius laminar flat-plate theory, C_D = 1.328 / sqrt(Re_L)
for one face (Schlichting, Boundary-Layer Theory, laminar flat plate; from memory), to make sure
the study really ran before its reproduction is judged. The tolerance is loose on purpose: the
check is that the solver produced a boundary layer, not the study's own accuracy.
"""

from __future__ import annotations

import math
import os
import shutil
from pathlib import Path

import pandas as pd
import pytest

from studyflow.bundle import RerunChoice, audit, pack, safe_extract

REPO = Path(__file__).resolve().parents[2]
STUDY = REPO / "studies" / "plate-drag"
TEMPLATE = REPO / "templates" / "plate"

pytestmark = pytest.mark.skipif(not (STUDY / "study.yaml").is_file() or shutil.which("studyflow-fv") is None,
                                reason="the flat-plate demo or studyflow-fv is not in this checkout")


@pytest.fixture(scope="module")
def plate_bundle(tmp_path_factory: pytest.TempPathFactory) -> Path:
    from studyflow import api

    base = tmp_path_factory.mktemp("plate")
    study = base / "studies" / "plate-drag"
    study.mkdir(parents=True)
    shutil.copy2(STUDY / "study.yaml", study / "study.yaml")
    shutil.copytree(TEMPLATE, base / "templates" / "plate")
    text = (study / "study.yaml").read_text()
    if "\naudit:" not in text:
        # the solver's own wall time is the one quantity no re-run reproduces
        (study / "study.yaml").write_text(text + "\naudit:\n  ignore: [wall_time]\n")
    outcome = api.run(study, cores=min(2, os.cpu_count() or 1), progress=False)
    assert outcome.exit_code == 0, [(c.case, c.reason) for c in outcome.cases]
    api.assess(study)
    return pack(study, base / "plate-bundle.tar.gz").archive


def test_plate_study_ran(plate_bundle: Path, tmp_path: Path) -> None:
    safe_extract(plate_bundle, tmp_path / "x")
    results = pd.read_csv(tmp_path / "x/plate-drag-bundle/payload/studies/plate-drag/results/results.csv")
    fine = results[(results["quantity"] == "drag") & (results["level"] == results["level"].max())]
    blasius = 1.328 / math.sqrt(1.0e4)  # Re_L = 1e4 in the study file
    assert fine["value"].iloc[0] == pytest.approx(blasius, rel=0.1)


def test_plate_round_trip_in_another_folder_is_clean(plate_bundle: Path, tmp_path: Path) -> None:
    report = audit(plate_bundle, into=tmp_path / "review")
    assert report.ok, report.failures
    assert report.phases["integrity"].detail["checked"] > 20
    assert report.phases["rerender"].detail["cases"] == 3
    assert report.phases["uncertainty"].ran and report.phases["uncertainty"].ok


def _flip(path: Path, offset: int) -> None:
    data = bytearray(path.read_bytes())
    data[offset] ^= 0x01
    path.write_bytes(bytes(data))


@pytest.mark.parametrize("member", [
    "payload/studies/plate-drag/cases/tunnel--m1/logs/solve.log",
    "payload/studies/plate-drag/results/results.csv",
    "payload/templates/plate/case.toml",
])
def test_plate_flipped_byte_is_named_and_fails(plate_bundle: Path, tmp_path: Path, member: str) -> None:
    safe_extract(plate_bundle, tmp_path / "review")
    root = tmp_path / "review" / "plate-drag-bundle"
    _flip(root / member, offset=10)
    report = audit(root)
    assert not report.ok and f"altered: {member}" in report.failures


def test_plate_sampled_rerun_with_a_new_solver_release(plate_bundle: Path, tmp_path: Path, monkeypatch) -> None:
    # a "new release" of the solver: reports another version, computes the same numbers
    real = shutil.which("studyflow-fv")
    wrapper = tmp_path / "bin" / "studyflow-fv"
    wrapper.parent.mkdir()
    wrapper.write_text(f'#!/bin/sh\nif [ "$1" = "--version" ]; then echo "studyflow-fv 9.9.9"; exit 0; fi\n'
                       f'exec "{real}" "$@"\n')
    wrapper.chmod(0o755)
    monkeypatch.setenv("PATH", f"{wrapper.parent}{os.pathsep}{os.environ['PATH']}")
    # a seed whose one-case sample is the coarsest case keeps this test quick
    cases = ["tunnel--m0", "tunnel--m1", "tunnel--m2"]
    seed = next(s for s in range(100) if RerunChoice("sample", n=1, seed=s).pick(cases) == ["tunnel--m0"])
    report = audit(plate_bundle, into=tmp_path / "review", rerun=RerunChoice("sample", n=1, seed=seed),
                   engine="direct")
    assert report.ok, report.failures
    assert report.phases["rerun"].detail["cases"] == ["tunnel--m0"]
    checks = report.phases["rerun"].detail["checks"]
    assert {"drag", "cf", "cf_station", "mass_residual"} <= {c["quantity"] for c in checks if c["compared"]}
    assert [c["quantity"] for c in checks if not c["compared"]] == ["wall_time"]
    notes = [n for n in report.notes if n["what"] == "solver version"]
    assert [(n["name"], n["now"]) for n in notes] == [("studyflow-fv", "9.9.9")]
    assert notes[0]["packed"] != "9.9.9"
