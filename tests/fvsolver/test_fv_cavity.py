"""Lid-driven square cavity at Re = 100 against Ghia, Ghia & Shin, J. Comput. Phys. 48 (1982) 387-411.

Convention (the paper's and the solver's): unit square, lid at y = 1 moving in +x with speed 1,
Re = U L / nu; u along the vertical centreline x = 1/2 (Table I), v along the horizontal
centreline y = 1/2 (Table II); the primary vortex turns clockwise, so psi_min < 0 with
psi = 0 on the walls and u = dpsi/dy.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

DATA = Path(__file__).resolve().parents[1] / "data"


def _table(name: str) -> np.ndarray:
    return np.loadtxt(DATA / name, delimiter=",", comments="#", skiprows=3)


def test_u_on_vertical_centreline_matches_ghia_table_1(cavity_128):
    ref = _table("ghia1982_re100_u_vertical_centreline.csv")  # Ghia et al. 1982, Table I
    prof = cavity_128.metrics["centreline_u"]
    got = np.interp(ref[:, 0], prof["y"], prof["u"])
    dev = np.abs(got - ref[:, 1])
    assert dev.max() < 0.01, f"max |u - Ghia| = {dev.max():.4f} at y = {ref[dev.argmax(), 0]}"


def test_v_on_horizontal_centreline_matches_ghia_table_2(cavity_128):
    ref = _table("ghia1982_re100_v_horizontal_centreline.csv")  # Ghia et al. 1982, Table II
    prof = cavity_128.metrics["centreline_v"]
    got = np.interp(ref[:, 0], prof["x"], prof["v"])
    dev = np.abs(got - ref[:, 1])
    assert dev.max() < 0.01, f"max |v - Ghia| = {dev.max():.4f} at x = {ref[dev.argmax(), 0]}"


def test_primary_vortex_centre_and_strength(cavity_128):
    v = cavity_128.metrics["vortex"]
    # Ghia et al. 1982, Table III, Re = 100: psi_min = -0.103423 at (0.6172, 0.7344) (from memory);
    # their mesh spacing is 1/128, so the centre is only known to about one cell.
    assert abs(v["x"] - 0.6172) < 0.01 and abs(v["y"] - 0.7344) < 0.01, v
    assert abs(v["psi_min"] / -0.103423 - 1) < 0.01, v


def test_reference_tables_keep_their_source_header():
    for name in ("ghia1982_re100_u_vertical_centreline.csv", "ghia1982_re100_v_horizontal_centreline.csv"):
        head = (DATA / name).read_text(encoding="utf-8").splitlines()[0]
        assert head.startswith("# Ghia, Ghia & Shin, J. Comput. Phys. 48 (1982)")
