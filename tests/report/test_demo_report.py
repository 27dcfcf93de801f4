"""The report of a real demo study (duct-lining: gmsh, FiPy, post step) run end to end by studyflow.

Runs on three of the study's four mesh levels to stay quick; marked ``examples`` like the other
tests that need the optional gmsh/FiPy extra.
"""

from __future__ import annotations

import shutil
import sys
from pathlib import Path

import pandas as pd
import pytest

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "examples"))
from tube_wall_support import STUDY, TEMPLATE, exact_heat_flow, needs_tools

pytestmark = [pytest.mark.examples, needs_tools]


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    from studyflow import api

    root = tmp_path_factory.mktemp("demo")
    ignore = shutil.ignore_patterns("cases", "results", "report", ".studyflow", ".snakemake", "__pycache__")
    shutil.copytree(STUDY, root / "studies" / STUDY.name, ignore=ignore)
    shutil.copytree(TEMPLATE, root / "templates" / TEMPLATE.name, ignore=ignore)
    study = root / "studies" / STUDY.name
    text = (study / "study.yaml").read_text()
    assert "levels: 4" in text
    (study / "study.yaml").write_text(text.replace("levels: 4", "levels: 3", 1))
    api.run(study, cores=2, progress=False)
    api.assess(study)
    return study, api.report(study)


def test_demo_report_shows_the_assessed_heat_flow(demo):
    study, result = demo
    page = result.index.read_text()
    unc = pd.read_csv(study / "results" / "uncertainty.csv")
    row = unc[unc.quantity == "heat_flow"].iloc[0]
    for value in (row.order, row.extrapolated, row.U):
        assert f"{value:.4g}" in page
    # what the report shows is the physical answer: steady radial conduction through a cylindrical
    # wall, q' = 2 pi k (T1 - T2) / ln(r2/r1) (Incropera and DeWitt, Eq. 3.27, 6th ed., from memory)
    assert abs(row.extrapolated - exact_heat_flow()) / exact_heat_flow() < 0.02
    assert result.counts == {"done": 3, "failed": 0, "pending": 0}


def test_demo_report_draws_the_gmsh_mesh_family_and_histories(demo):
    _, result = demo
    names = {f.name for f in result.figures}
    assert {"value-heat_flow", "error-heat_flow", "residuals-01", "meshes"} <= names
    # histories and the cell count behind h are not results to assess: no sections of their own
    assert "value-residual_history" not in names and "value-cell_count" not in names
    for f in result.figures:
        assert f.png.stat().st_size > 1000 and f.svg.stat().st_size > 200
