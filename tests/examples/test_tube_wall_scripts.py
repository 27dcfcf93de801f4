"""The three step scripts of templates/tube-wall run by hand, without studyflow, against the exact answer."""

from __future__ import annotations

import json
import math
import os
import subprocess
import sys
from pathlib import Path

import jinja2
import pytest
from tube_wall_support import (
    CONDUCTIVITY,
    R_INNER,
    R_OUTER,
    T_INNER,
    T_OUTER,
    TEMPLATE,
    exact_heat_flow,
    needs_tools,
)

pytestmark = [pytest.mark.examples, needs_tools]


def make_case(folder: Path, lc: float, r_outer: float = R_OUTER) -> Path:
    folder.mkdir(parents=True)
    for script in ("mesh.py", "solve.py", "post.py"):
        (folder / script).write_text((TEMPLATE / script).read_text())
    text = jinja2.Template((TEMPLATE / "wall.json").read_text(), undefined=jinja2.StrictUndefined).render(
        r_inner=R_INNER, r_outer=r_outer, conductivity=CONDUCTIVITY, t_inner=T_INNER, t_outer=T_OUTER,
        mesh={"lc": lc})
    (folder / "wall.json").write_text(text)
    return folder


def run(folder: Path, script: str) -> subprocess.CompletedProcess:
    # A bare PATH without the interpreter's bin folder: solve.py must find pip's gmsh executable itself.
    env = {"PATH": "/usr/bin:/bin", "HOME": os.environ.get("HOME", "/tmp")}
    return subprocess.run([sys.executable, script], cwd=folder, env=env, check=False, capture_output=True,
                          text=True, timeout=120)


def run_all(folder: Path) -> dict:
    for script in ("mesh.py", "solve.py", "post.py"):
        done = run(folder, script)
        assert done.returncode == 0, f"{script} failed:\n{done.stdout}\n{done.stderr}"
    return json.loads((folder / "heat.json").read_text())


def test_two_levels_by_hand_approach_the_exact_heat_flow(tmp_path: Path) -> None:
    exact = exact_heat_flow()
    coarse = run_all(make_case(tmp_path / "coarse", 0.2))
    fine = run_all(make_case(tmp_path / "fine", 0.1))

    # FiPy reads only MSH 2.2: the mesher must have written that version.
    header = (tmp_path / "fine" / "mesh.msh").read_text().splitlines()[:2]
    assert header[0] == "$MeshFormat" and header[1].split()[0] == "2.2"

    for result in (coarse, fine):
        q = result["heat_flow"]["per_length"]
        # A finite-volume scheme conserves heat discretely: what enters at the hot face leaves at the
        # cold one, to round-off (common practice).
        assert result["heat_flow"]["outer"] == pytest.approx(q, rel=1e-9)
        # The polygonal boundary loses area of order lc^2 (common practice); the meshed area must be the
        # annulus pi (r2^2 - r1^2) to well under a percent.
        assert result["mesh"]["area"] == pytest.approx(math.pi * (R_OUTER**2 - R_INNER**2), rel=1e-3)
        # A direct (LU) solve of a linear problem leaves round-off only.
        assert result["solver"]["residual_relative"] < 1e-10
        # Both meshes are coarse, but a heat flow off by more than 5 % would mean a wrong set-up.
        assert abs(q - exact) / exact < 0.05

    # Halving lc roughly quadruples the triangle count in 2-D (common practice) ...
    assert 3.0 < fine["mesh"]["cells"] / coarse["mesh"]["cells"] < 5.0
    # ... and must bring the heat flow closer to the exact answer (Incropera and DeWitt, see tube_wall_support).
    err_coarse = abs(coarse["heat_flow"]["per_length"] - exact)
    err_fine = abs(fine["heat_flow"]["per_length"] - exact)
    assert err_fine < 0.75 * err_coarse


def test_mesher_rejects_an_outer_radius_inside_the_bore(tmp_path: Path) -> None:
    folder = make_case(tmp_path / "bad", 0.2, r_outer=0.8)
    done = run(folder, "mesh.py")
    assert done.returncode != 0
    assert "wall.json" in done.stderr and "r_outer" in done.stderr and "0.8" in done.stderr
    assert not (folder / "mesh.msh").exists()
