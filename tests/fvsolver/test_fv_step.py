"""Backward-facing step (expansion ratio 2): recirculation behind the step, and far downstream
the flow must recover plane Poiseuille flow in the full height (analytic: with mean speed U/2
over height H, u = 3 U y (H - y) / H^2)."""

from __future__ import annotations

import numpy as np
import pytest
from fv_support import solve_case

from studyflow.fvsolver.metrics import _profile_at


@pytest.fixture(scope="module")
def steps():
    return {re: solve_case({"case": {"kind": "step", "reynolds": re}, "mesh": {"nx": 120, "ny": 32}})
            for re in (50.0, 100.0)}


def test_downstream_profile_recovers_poiseuille(steps):
    r = steps[100.0]
    u, _, _ = r.fields
    g = r.problem.grid
    prof = _profile_at(g, u, 12.0)
    exact = 3.0 * g.yc * (1.0 - g.yc)  # plane Poiseuille flow, mean 1/2 (analytic)
    assert np.abs(prof - exact).max() / 0.75 < 0.005


def test_mass_is_conserved_through_every_section(steps):
    r = steps[100.0]
    u, _, _ = r.fields
    flux = (u * r.problem.grid.dy[None, :]).sum(axis=1)
    # the same volume flux through every section (continuity holds to round-off) ...
    assert np.allclose(flux, flux[0], rtol=1e-11, atol=0.0)
    # ... and it is the midpoint-rule sum of the inlet profile 24 s (1/2 - s), s in [0, 1/2], whose
    # integral is 1/2; the midpoint rule's error (b - a) h^2 f''/24 is exact for a quadratic, so
    # the sum is 1/2 + h^2 on the uniform 32-cell height (h = 1/32)
    assert abs(flux[0] - (0.5 + (1.0 / 32) ** 2)) < 1e-12


def test_separated_region_behind_the_step_grows_with_reynolds_number(steps):
    a, b = steps[50.0].metrics["reattachment_length"], steps[100.0].metrics["reattachment_length"]
    # common practice (laminar range): the lower-wall bubble lengthens roughly in proportion to Re
    assert 0.2 < a < b < 2.5 * a, (a, b)
    tau = np.array(steps[100.0].metrics["lower_wall_shear"]["tau"])
    assert tau[0] < 0 and tau[-1] > 0  # reversed flow at the step, attached at the outlet
    for r in steps.values():
        assert r.outcome.status == "converged"


@pytest.fixture(scope="module")
def step_800():
    # the classic test problem: Re = 800 (mean inflow speed, downstream height), outlet 30 H
    # downstream; reached through a Reynolds-number ramp on the coarsest of three meshes
    return solve_case({"case": {"kind": "step", "reynolds": 800.0}, "domain": {"length": 30.0},
                       "mesh": {"nx": 400, "ny": 128},
                       "solve": {"coarse_levels": 2, "ramp": [100.0, 200.0, 300.0, 400.0, 500.0, 600.0, 700.0]}})


@pytest.mark.parametrize("key, published, tol", [
    ("reattachment_length", 6.10, 0.01),  # lower-wall reattachment
    ("upper_separation", 4.85, 0.02),
    ("upper_reattachment", 10.48, 0.01),
])
def test_re800_bubbles_match_gartling_1990(step_800, key, published, tol):
    # Gartling, "A test problem for outflow boundary conditions - flow over a backward-facing
    # step", Int. J. Numer. Methods Fluids 11 (1990) 953-967: lower-wall reattachment at x = 6.10 H,
    # upper-wall bubble from 4.85 H to 10.48 H (values from memory, in downstream heights H from
    # the step). Tolerances: the separation point sits where the upper-wall shear is flat, so it
    # moves most with the mesh (4.72, 4.77, 4.79 H on 64, 96, 128 cells across, measured here).
    r = step_800
    assert r.outcome.status == "converged"
    got = r.metrics[key]
    assert abs(got - published) <= tol * published, f"{key}: {got:.4f} H against {published} H (Gartling 1990)"
