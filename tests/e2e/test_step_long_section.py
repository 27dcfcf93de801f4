"""The backward-facing step demo at Re = 800 (studies/step-long-section) from study file to
uncertainty table, against the published test problem.

Reference: Gartling, "A test problem for outflow boundary conditions - flow over a
backward-facing step", Int. J. Numer. Methods Fluids 11 (1990) 953-967, at the same conditions
(expansion ratio 2, parabolic inflow, Re = 800 on the mean inflow speed and the downstream height,
outlet 30 heights downstream): lower-wall reattachment at 6.10 H, upper-wall bubble from 4.85 H
to 10.48 H, lengths from the step (values from memory).

What is checked is the main job: three nested meshes run through the workflow, collected into
the tidy table and assessed; the Richardson-extrapolated values must land on the published ones,
and where the analysis says the levels are in the asymptotic range, its uncertainty U must
cover the fine-mesh value's distance from them.
"""

from __future__ import annotations

import os
import shutil
from pathlib import Path

import pandas as pd
import pytest

REPO = Path(__file__).resolve().parents[2]
STUDY = REPO / "studies" / "step-long-section"
TEMPLATE = REPO / "templates" / "step"
GARTLING_1990 = {"reattachment": 6.10, "upper_separation": 4.85, "upper_reattachment": 10.48}

pytestmark = pytest.mark.skipif(not (STUDY / "study.yaml").is_file() or shutil.which("studyflow-fv") is None,
                                reason="the step demo or studyflow-fv is not in this checkout")


@pytest.fixture(scope="module")
def table(tmp_path_factory: pytest.TempPathFactory) -> pd.DataFrame:
    from studyflow import api

    base = tmp_path_factory.mktemp("step800")
    study = base / "studies" / STUDY.name
    study.mkdir(parents=True)
    shutil.copy2(STUDY / "study.yaml", study / "study.yaml")
    shutil.copytree(TEMPLATE, base / "templates" / "step")
    outcome = api.run(study, cores=min(2, os.cpu_count() or 1), progress=False)
    assert outcome.exit_code == 0, [(c.case, c.reason) for c in outcome.cases]
    api.assess(study)
    return pd.read_csv(study / "results" / "uncertainty.csv").set_index("quantity")


@pytest.mark.parametrize("quantity, tol", [("reattachment", 0.005), ("upper_separation", 0.01),
                                           ("upper_reattachment", 0.005)])
def test_extrapolated_bubble_ends_match_gartling_1990(table: pd.DataFrame, quantity: str, tol: float) -> None:
    row = table.loc[quantity]
    assert row["levels"] == 3 and row["method"] == "three-level"
    published = GARTLING_1990[quantity]
    assert abs(row["extrapolated"] - published) <= tol * published, (
        f"{quantity}: extrapolated {row['extrapolated']:.4f} H against {published} H (Gartling 1990)")


def test_uncertainty_covers_the_published_value_where_asymptotic(table: pd.DataFrame) -> None:
    asymptotic = table[table["verdict"] == "in the asymptotic range"]
    assert "reattachment" in asymptotic.index  # observed order 1.76 against the formal 2 (measured)
    for quantity, row in asymptotic.iterrows():
        miss = abs(row["value_fine"] - GARTLING_1990[quantity])
        assert miss <= row["U"], f"{quantity}: fine value misses by {miss:.4f} H, U = {row['U']:.4f} H"


def test_upper_reattachment_is_flagged_not_asymptotic(table: pd.DataFrame) -> None:
    # its differences fall by ~20x per refinement (observed order ~4.3, measured), far from the
    # scheme's formal order 2: a GCI from that order is not to be trusted, and the verdict says so
    row = table.loc["upper_reattachment"]
    assert row["order"] > 3 and row["verdict"] != "in the asymptotic range", row["verdict"]


def test_iterative_error_is_negligible_beside_the_mesh_uncertainty(table: pd.DataFrame) -> None:
    # the solver's monitors.csv gives each quantity at every Newton iterate; the study's
    # iterative_window: 2 takes half the last change (common practice: iterative error should sit
    # one to two orders below the discretization uncertainty, here under 1 % of U)
    for quantity, row in table.iterrows():
        assert bool(row["iterative_ok"]) is True, f"{quantity}: {row['iterative_error']} against U = {row['U']}"
        assert 0 <= row["iterative_error"] < 0.01 * row["U"]
