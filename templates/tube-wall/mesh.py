"""Mesher step: an unstructured triangular mesh of the tube wall (an annulus) with the gmsh API.

Reads wall.json (radii and the characteristic length ``lc`` of this mesh level), writes mesh.msh in
MSH format 2.2 (the only version FiPy 4.0.3 reads) with the physical groups ``inner`` and ``outer``
(the two boundary circles) and ``wall`` (the cross-section). Bad geometry stops the step with a
message naming wall.json, the key and the value, and exit status 2, so the solve step never runs.
"""

from __future__ import annotations

import json
import math
import sys

SETTINGS = "wall.json"
OUTPUT = "mesh.msh"


def fail(message: str) -> None:
    print(f"mesh.py: {message}", file=sys.stderr)
    sys.exit(2)


def read_settings() -> dict[str, float]:
    try:
        with open(SETTINGS, encoding="utf-8") as fh:
            cfg = json.load(fh)
    except (OSError, ValueError) as exc:
        fail(f"{SETTINGS}: cannot read the settings: {exc}")
    for key in ("r_inner", "r_outer", "lc"):
        value = cfg.get(key)
        if not isinstance(value, (int, float)) or isinstance(value, bool) or not math.isfinite(value):
            fail(f"{SETTINGS}: {key} must be a finite number (got {value!r})")
    if cfg["r_inner"] <= 0:
        fail(f"{SETTINGS}: r_inner must be positive (got {cfg['r_inner']!r})")
    if cfg["r_outer"] <= cfg["r_inner"]:
        fail(
            f"{SETTINGS}: r_outer must be greater than r_inner = {cfg['r_inner']!r} "
            f"(got {cfg['r_outer']!r})"
        )
    # A cell larger than the wall is thick gives no interior cells worth the name.
    if not 0 < cfg["lc"] <= cfg["r_outer"] - cfg["r_inner"]:
        fail(
            f"{SETTINGS}: lc must be positive and at most the wall thickness "
            f"{cfg['r_outer'] - cfg['r_inner']!r} (got {cfg['lc']!r})"
        )
    return cfg


def circle(geo, centre: int, radius: float, lc: float) -> tuple[int, list[int]]:
    """A circle as four quarter arcs (gmsh arcs must span less than pi)."""
    corners = [
        geo.addPoint(radius, 0.0, 0.0, lc),
        geo.addPoint(0.0, radius, 0.0, lc),
        geo.addPoint(-radius, 0.0, 0.0, lc),
        geo.addPoint(0.0, -radius, 0.0, lc),
    ]
    arcs = [geo.addCircleArc(corners[i], centre, corners[(i + 1) % 4]) for i in range(4)]
    return geo.addCurveLoop(arcs), arcs


def main() -> int:
    cfg = read_settings()
    import gmsh  # imported late so bad settings are reported even where gmsh is missing

    lc = float(cfg["lc"])
    gmsh.initialize(["mesh.py"], readConfigFiles=False)
    try:
        triangles = build_and_write(gmsh, cfg, lc)
    except Exception as exc:  # noqa: BLE001  gmsh reports its own failures as plain Exception
        fail(f"gmsh could not mesh the wall (lc = {lc:g}): {exc}")
    finally:
        gmsh.finalize()
    print(f"mesh.py: lc = {lc:g}: {triangles} triangles written to {OUTPUT} (MSH 2.2)")
    return 0


def build_and_write(gmsh, cfg: dict[str, float], lc: float) -> int:
    """Mesh the annulus, write it, return the number of triangles."""
    gmsh.option.setNumber("General.Terminal", 1)
    gmsh.option.setNumber("General.Verbosity", 2)  # errors and warnings only: keeps the log short
    gmsh.option.setNumber("General.NumThreads", 1)
    gmsh.model.add("tube_wall")
    geo = gmsh.model.geo
    centre = geo.addPoint(0.0, 0.0, 0.0, lc)
    outer_loop, outer_arcs = circle(geo, centre, float(cfg["r_outer"]), lc)
    inner_loop, inner_arcs = circle(geo, centre, float(cfg["r_inner"]), lc)
    surface = geo.addPlaneSurface([outer_loop, inner_loop])
    geo.synchronize()
    gmsh.model.addPhysicalGroup(1, inner_arcs, tag=1, name="inner")
    gmsh.model.addPhysicalGroup(1, outer_arcs, tag=2, name="outer")
    gmsh.model.addPhysicalGroup(2, [surface], tag=3, name="wall")
    gmsh.model.mesh.generate(2)
    gmsh.option.setNumber("Mesh.MshFileVersion", 2.2)
    gmsh.option.setNumber("Mesh.Binary", 0)
    gmsh.write(OUTPUT)
    _, element_tags, _ = gmsh.model.mesh.getElements(2)
    return sum(len(tags) for tags in element_tags)


if __name__ == "__main__":
    sys.exit(main())
