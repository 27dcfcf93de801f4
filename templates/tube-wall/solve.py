"""Solve step: steady heat conduction in the tube wall with FiPy, fixed inner and outer temperatures.

Solves div(k grad T) = 0 on mesh.msh with T = t_inner on the ``inner`` circle and T = t_outer on the
``outer`` circle, and writes solution.npz: the cell temperatures, the cell areas, the heat flow through
every boundary face as FiPy's own discretisation sees it, and the solver's residual after each sweep.
"""

from __future__ import annotations

import os
import sys

# FiPy's gmsh reader runs the `gmsh` executable by name (to learn its version); pip's gmsh installs
# that executable next to the Python interpreter, which need not be on the PATH the step inherits.
os.environ["PATH"] = os.path.dirname(sys.executable) + os.pathsep + os.environ.get("PATH", "")
# One fixed solver suite, so a case gives the same numbers wherever it runs.
os.environ.setdefault("FIPY_SOLVERS", "scipy")

import json

import numpy as np

SETTINGS = "wall.json"
MESH = "mesh.msh"
OUTPUT = "solution.npz"
SWEEPS = 3  # the problem is linear: sweep 1 solves it, later sweeps measure the residual left


def fail(message: str) -> None:
    print(f"solve.py: {message}", file=sys.stderr)
    sys.exit(2)


def main() -> int:
    with open(SETTINGS, encoding="utf-8") as fh:
        cfg = json.load(fh)
    k = float(cfg["conductivity"])
    t_inner = float(cfg["t_inner"])
    t_outer = float(cfg["t_outer"])
    if not k > 0:
        fail(f"{SETTINGS}: conductivity must be positive (got {cfg['conductivity']!r})")

    import fipy
    from fipy.solvers.scipy import LinearLUSolver

    mesh = fipy.Gmsh2D(MESH)
    for name in ("inner", "outer"):
        if name not in mesh.physicalFaces:
            fail(f"{MESH}: no physical group {name!r} (found {sorted(mesh.physicalFaces)})")
    inner = np.asarray(mesh.physicalFaces["inner"].value, dtype=bool)
    outer = np.asarray(mesh.physicalFaces["outer"].value, dtype=bool)

    temperature = fipy.CellVariable(mesh=mesh, name="T", value=0.5 * (t_inner + t_outer))
    temperature.constrain(t_inner, where=mesh.physicalFaces["inner"])
    temperature.constrain(t_outer, where=mesh.physicalFaces["outer"])
    equation = fipy.DiffusionTerm(coeff=k, var=temperature)

    solver = LinearLUSolver()
    # sweep() returns the residual norm |b - A T| of the values it starts from.
    residuals = [float(equation.sweep(var=temperature, solver=solver)) for _ in range(SWEEPS)]

    # The heat flow through a fixed-temperature face is the two-point flux FiPy's DiffusionTerm
    # imposes there: k A_f (T_face - T_P) / d_fP, with d_fP the cell-centre-to-face distance.
    cell_of_face = np.asarray(mesh.faceCellIDs.filled(-1))[0]
    face_area = np.asarray(mesh._faceAreas)
    distance = np.asarray(mesh._cellDistances)
    t_cell = np.asarray(temperature.value)
    q_in = k * face_area[inner] * (t_inner - t_cell[cell_of_face[inner]]) / distance[inner]
    q_out = k * face_area[outer] * (t_cell[cell_of_face[outer]] - t_outer) / distance[outer]

    np.savez(
        OUTPUT,
        temperature=t_cell,
        cell_area=np.asarray(mesh.cellVolumes),
        cell_centres=np.asarray(mesh.cellCenters.value),
        inner_face_flow=q_in,
        outer_face_flow=q_out,
        inner_face_length=face_area[inner],
        outer_face_length=face_area[outer],
        residuals=np.asarray(residuals),
    )
    print(
        f"solve.py: {mesh.numberOfCells} cells, residual after solve {residuals[-1]:.3e} "
        f"(first sweep {residuals[0]:.3e})"
    )
    return 0


if __name__ == "__main__":
    sys.exit(main())
