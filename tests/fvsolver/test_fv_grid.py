"""Stretched meshes: geometric progression, nesting under refinement by 2, matched plate segments."""

from __future__ import annotations

import numpy as np

from studyflow.fvsolver import cases, config
from studyflow.fvsolver.grid import clustered, exp_nodes


def test_exponential_map_is_a_geometric_progression():
    # consecutive cells grow by the constant factor q = e^{a/n} (definition of the map)
    x = exp_nodes(2.0, 20, np.log(50.0))
    d = np.diff(x)
    assert np.allclose(d[1:] / d[:-1], np.exp(np.log(50.0) / 20))
    assert np.isclose(x[0], 0.0) and np.isclose(x[-1], 2.0)


def test_refined_mesh_contains_the_coarse_nodes():
    # nested meshes, as a grid-convergence study wants (Roache 1998)
    for toward in ("low", "high", "both"):
        c = clustered(0.0, 3.0, 16, 300.0, toward)
        f = clustered(0.0, 3.0, 32, 300.0, toward)
        assert np.allclose(f[::2], c), toward


def test_plate_mesh_is_nested_and_has_lines_at_leading_edge_and_x_equals_l():
    coarse = cases.plate_grid(config.parse({"case": {"kind": "plate"}, "mesh": {"nx": 64, "ny": 32}}))
    fine = cases.plate_grid(config.parse({"case": {"kind": "plate"}, "mesh": {"nx": 128, "ny": 64}}))
    assert np.allclose(fine.xf[::2], coarse.xf) and np.allclose(fine.yf[::2], coarse.yf)
    assert np.any(np.isclose(fine.xf, 0.0)) and np.any(np.isclose(fine.xf, 1.0))
    # the segments meet with cells of about the same size (within 25 %), no jumps at x = 0 or 1
    d = np.diff(fine.xf)
    k0, k1 = int(np.argmin(np.abs(fine.xf - 0.0))), int(np.argmin(np.abs(fine.xf - 1.0)))
    for k in (k0, k1):
        assert 0.75 < d[k] / d[k - 1] < 1.25


def test_coarse_to_fine_interpolation_is_exact_for_bilinear_fields():
    # bilinear interpolation reproduces any f = a + b x + c y + d x y exactly, also where it
    # extrapolates past the outermost coarse nodes (common practice; here used for mesh sequencing)
    from studyflow.fvsolver.grid import Grid
    from studyflow.fvsolver.newton import interpolate

    coarse = Grid(clustered(0.0, 2.0, 8, 5.0, "low"), clustered(0.0, 1.0, 6, 3.0, "both"))
    fine = Grid(clustered(0.0, 2.0, 16, 5.0, "low"), clustered(0.0, 1.0, 12, 3.0, "both"))

    def f(x, y):
        X, Y = np.meshgrid(x, y, indexing="ij")
        return 0.3 + 1.1 * X - 0.7 * Y + 0.45 * X * Y

    u, v, p = interpolate(coarse, (f(coarse.xf, coarse.yc), f(coarse.xc, coarse.yf), f(coarse.xc, coarse.yc)), fine)
    assert np.allclose(u, f(fine.xf, fine.yc)) and np.allclose(v, f(fine.xc, fine.yf))
    assert np.allclose(p, f(fine.xc, fine.yc))
