"""The duct-lining study end to end: gmsh mesher, FiPy solve and post step per level, run by studyflow.

One clean copy of the study and its template is run once (module fixture); the tests then check the
uncertainty table against the exact radial-conduction heat flow, and what reruns after an edit.
"""

from __future__ import annotations

import json
import math
import shutil
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from tube_wall_support import STUDY, TEMPLATE, exact_heat_flow, needs_tools

pytestmark = [pytest.mark.examples, needs_tools]

STEPS = ("mesh", "solve", "post")
LEVELS = 4
CORES = 2


def copy_study(root: Path) -> Path:
    """The study and its template copied as they sit in the repository (no case folders, no results)."""
    (root / "studies").mkdir(parents=True)
    (root / "templates").mkdir()
    ignore = shutil.ignore_patterns("cases", "results", "report", ".studyflow", ".snakemake", "__pycache__")
    shutil.copytree(STUDY, root / "studies" / STUDY.name, ignore=ignore)
    shutil.copytree(TEMPLATE, root / "templates" / TEMPLATE.name, ignore=ignore)
    return root / "studies" / STUDY.name


def started(study_dir: Path, case: str, step: str) -> float | None:
    """When the step last started (its status file), None if it never ran."""
    path = study_dir / "cases" / case / ".studyflow" / f"{step}.status.json"
    if not path.exists():
        return None
    return json.loads(path.read_text())["started_at"]


def start_times(study_dir: Path, cases: list[str]) -> dict[tuple[str, str], float | None]:
    return {(c, s): started(study_dir, c, s) for c in cases for s in STEPS}


def edit(path: Path, old: str, new: str) -> None:
    text = path.read_text()
    assert old in text, f"{path} no longer holds {old!r}; the test edit must follow the file"
    path.write_text(text.replace(old, new, 1))


def stale(plan) -> set[tuple[str, str]]:
    return {(s.case, s.step) for s in plan.to_run()}


@pytest.fixture(scope="module")
def ran(tmp_path_factory):
    """The four-level study run once from a clean copy, then collected and assessed."""
    from studyflow import api

    study_dir = copy_study(tmp_path_factory.mktemp("duct"))
    outcome = api.run(study_dir, cores=CORES, progress=False)
    assessment = api.assess(study_dir)
    tables = api.results(study_dir)
    return {"dir": study_dir, "outcome": outcome, "tables": tables,
            "uncertainty": assessment.uncertainty.copy(), "results": tables.results.copy()}


def test_four_levels_run_end_to_end_from_a_clean_copy(ran) -> None:
    outcome = ran["outcome"]
    assert outcome.exit_code == 0, [(c.case, c.reason) for c in outcome.failed]
    assert sorted(c.case for c in outcome.done) == [f"lining--m{k}" for k in range(LEVELS)]
    heat = ran["results"].query("quantity == 'heat_flow'").sort_values("level")
    assert list(heat["level"]) == list(range(LEVELS))
    assert (heat["status"] == "done").all() and heat["converged"].astype(bool).all()
    # Representative size from the cell count and the lining area: h = (A / N)^(1/2)
    # (Celik et al., J. Fluids Eng. 130 (2008) 078001, Eq. 1).
    area = math.pi * (2.0**2 - 1.0**2)
    assert np.allclose(heat["h"], np.sqrt(area / heat["cells"]), rtol=1e-9)
    # Each level halves gmsh's characteristic length, so about four times the triangles in 2-D
    # (common practice); the coarsest mesh of lc = 0.2 on this lining has about 600.
    cells = heat["cells"].to_numpy()
    assert 400 < cells[0] < 800
    assert np.all((cells[1:] / cells[:-1] > 3.5) & (cells[1:] / cells[:-1] < 4.5))


def test_uncertainty_table_agrees_with_the_exact_heat_flow(ran) -> None:
    exact = exact_heat_flow()  # Incropera and DeWitt, see tube_wall_support.exact_heat_flow
    table = ran["uncertainty"]
    row = table[table["quantity"] == "heat_flow"]
    assert len(row) == 1
    row = row.iloc[0]
    heat = ran["results"].query("quantity == 'heat_flow'").sort_values("h")
    assert row["value_fine"] == pytest.approx(heat["value"].iat[0], rel=1e-12)
    assert row["levels"] == LEVELS

    # The order the meshes really show, measured against the exact answer: the slope of log|error|
    # over log h on all four levels (the definition of the order of accuracy; Roache, Verification and
    # Validation in Computational Science and Engineering, 1998, ch. 2, from memory).
    error = np.abs(heat["value"].to_numpy() - exact)
    p_true = np.polyfit(np.log(heat["h"].to_numpy()), np.log(error), 1)[0]
    # The analysis estimates its order without the exact answer; it must land near the true one.
    assert row["order"] == pytest.approx(p_true, abs=0.3)
    formal = 2.0  # second-order finite-volume scheme (studies/duct-lining/study.yaml: analysis.formal_order)

    bracket = abs(row["value_fine"] - exact) <= row["U"]
    words = f"{row['verdict']} {row['reason']}".lower()
    says_why = "below formal" in words or "below the formal" in words or "asymptotic" in words
    if p_true < 0.75 * formal:
        # The exact answer shows the order well below formal (the polygonal boundary and the two-point
        # boundary flux): the verdict must say so in words whether or not U brackets the error.
        assert says_why, f"verdict hides an order of {p_true:.2f} against formal {formal}: {words}"
    if not bracket:
        assert says_why, f"U = {row['U']:.4g} does not bracket the exact error and the verdict does not say why"
    else:
        # U is a band around the fine-mesh value that holds the exact heat flow.
        assert row["value_fine"] - row["U"] <= exact <= row["value_fine"] + row["U"]
    # Extrapolation with the observed order moves the estimate toward the exact answer.
    assert abs(row["extrapolated"] - exact) < abs(row["value_fine"] - exact)
    # Every case's solver residual fell by many orders (LU solve of a linear problem: round-off only).
    assert (ran["results"].query("quantity == 'residual'")["value"] < 1e-10).all()


def test_editing_only_the_post_step_reruns_only_that_step(ran) -> None:
    from studyflow import api

    study_dir = ran["dir"]
    cases = [f"lining--m{k}" for k in range(LEVELS)]
    assert api.plan(study_dir).to_run() == []
    before = start_times(study_dir, cases)
    mesh_file = study_dir / "cases" / cases[-1] / "mesh.msh"
    mesh_mtime = mesh_file.stat().st_mtime_ns

    edit(study_dir.parent.parent / "templates" / "tube-wall" / "post.py", "indent=2", "indent=1")
    plan = api.plan(study_dir)
    assert stale(plan) == {(c, "post") for c in cases}
    outcome = api.run(study_dir, cores=CORES, progress=False)
    assert outcome.exit_code == 0
    assert sorted(c.case for c in outcome.done) == cases
    after = start_times(study_dir, cases)
    for c in cases:
        assert after[(c, "mesh")] == before[(c, "mesh")] and after[(c, "solve")] == before[(c, "solve")]
        assert after[(c, "post")] > before[(c, "post")]
        assert (study_dir / "cases" / c / "heat.json").read_text().startswith('{\n "heat_flow"')
    assert mesh_file.stat().st_mtime_ns == mesh_mtime
    assert api.plan(study_dir).to_run() == []


def test_changing_the_refinement_ratio_reruns_all_three_steps(ran) -> None:
    from studyflow import api

    study_dir = ran["dir"]
    cases = [f"lining--m{k}" for k in range(LEVELS)]
    before = start_times(study_dir, cases)
    cells_before = {c: json.loads((study_dir / "cases" / c / "heat.json").read_text())["mesh"]["cells"]
                    for c in cases}
    edit(study_dir / "study.yaml", "ratio: 2\n", "ratio: 1.5\n")
    plan = api.plan(study_dir)
    # Level 0 keeps lc = 0.2 (spacings are level-0 lengths), so only the finer levels change; each of
    # them must redo the mesh and everything downstream of it.
    assert stale(plan) == {(c, s) for c in cases[1:] for s in STEPS}
    outcome = api.run(study_dir, cores=CORES, progress=False)
    assert outcome.exit_code == 0
    assert sorted(c.case for c in outcome.cases) == cases[1:]
    after = start_times(study_dir, cases)
    assert all(after[(cases[0], s)] == before[(cases[0], s)] for s in STEPS)
    for k, c in enumerate(cases[1:], start=1):
        assert all(after[(c, s)] > before[(c, s)] for s in STEPS)
        lc = json.loads((study_dir / "cases" / c / "wall.json").read_text())["lc"]
        assert lc == pytest.approx(0.2 / 1.5**k, rel=1e-12)
        cells = json.loads((study_dir / "cases" / c / "heat.json").read_text())["mesh"]["cells"]
        # Triangle count goes as lc^-2 in 2-D (common practice): (2/1.5)^(2k) fewer than with ratio 2.
        assert cells / cells_before[c] == pytest.approx((1.5 / 2.0) ** (2 * k), rel=0.15)


MESHER_MESSAGE = "wall.json: r_outer must be greater than r_inner = 1.0 (got 0.8)"  # mesh.py's own words


@pytest.fixture(scope="module")
def failed_run(tmp_path_factory):
    """One level of the study with a second point whose outer radius lies inside the bore."""
    from studyflow import api

    study_dir = copy_study(tmp_path_factory.mktemp("cracked"))
    edit(study_dir / "study.yaml", "levels: 4", "levels: 1")
    edit(study_dir / "study.yaml", "- {id: lining, r_inner: 1.0, r_outer: 2.0}",
         "- {id: lining, r_inner: 1.0, r_outer: 2.0}\n      - {id: cracked, r_inner: 1.0, r_outer: 0.8}")
    outcome = api.run(study_dir, cores=CORES, progress=False)
    return {"dir": study_dir, "outcome": outcome, "cases": ran_cases_table(study_dir)}


def test_a_failing_mesher_fails_the_case_and_skips_its_solve(failed_run) -> None:
    study_dir, outcome, cases = failed_run["dir"], failed_run["outcome"], failed_run["cases"]
    assert outcome.exit_code == 1  # EXIT_CASES_FAILED: the run finished, a case failed
    assert [c.case for c in outcome.done] == ["lining--m0"]
    (failed,) = outcome.failed
    assert failed.case == "cracked--m0"
    assert failed.reason.startswith("mesh:")
    case_dir = study_dir / "cases" / "cracked--m0"
    assert MESHER_MESSAGE in (case_dir / "logs" / "mesh.log").read_text()
    # The solve never started: no status, no output.
    assert started(study_dir, "cracked--m0", "solve") is None
    assert not (case_dir / "solution.npz").exists() and not (case_dir / "mesh.msh").exists()
    assert cases.loc["cracked--m0", "status"] == "failed"
    assert cases.loc["cracked--m0", "reason"].startswith("step mesh")
    assert cases.loc["lining--m0", "status"] == "done"


def test_the_failed_case_reason_carries_the_mesher_message(failed_run) -> None:
    (failed,) = failed_run["outcome"].failed
    assert MESHER_MESSAGE in failed.reason
    assert MESHER_MESSAGE in failed_run["cases"].loc["cracked--m0", "reason"]


def ran_cases_table(study_dir: Path):
    from studyflow import api

    return api.results(study_dir).cases.set_index("case")


def test_command_line_plan_lists_nothing_to_run_after_the_run(ran) -> None:
    """The command line's plan over the finished study lists nothing to run."""
    study_dir = ran["dir"]
    plan = subprocess.run([sys.executable, "-m", "studyflow.cli", "plan", str(study_dir)],
                          check=False, capture_output=True, text=True, timeout=120)
    assert plan.returncode == 0, plan.stderr
    assert "0 case(s) to run" in plan.stdout
