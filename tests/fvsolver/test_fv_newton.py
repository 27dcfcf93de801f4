"""Iterative convergence: residual histories, chord steps, stopping rules and exit statuses."""

from __future__ import annotations

import numpy as np
import pytest
from fv_support import solve_case

from studyflow.fvsolver.newton import COLUMNS


@pytest.mark.parametrize("case", ["plate_fine", "cavity_128", "channel_run"])
def test_residuals_fall_at_least_eight_orders(case, request):
    res = request.getfixturevalue(case)
    h = np.array([row[1:4] for row in res.outcome.history])
    # common practice: iterative error negligible when the normalised imbalances fall 8+ decades
    ok = h[0] > 0  # a column that starts at zero (uniform flow satisfies continuity) has no drop
    drop = np.log10(h[0][ok] / np.maximum(h[-1][ok], 1e-300))
    assert res.outcome.status == "converged"
    assert np.all(drop >= 8), f"{case}: decades of drop per column {drop}"
    assert np.all(h[-1] <= res.problem.config.tolerance)


def test_residuals_fall_eight_orders_for_the_manufactured_case(mms_runs):
    for r in mms_runs:
        h = np.array([row[1:4] for row in r.outcome.history])
        ok = h[0] > 0
        assert np.all(np.log10(h[0][ok] / h[-1][ok]) >= 8), h[[0, -1]]


def test_newton_converges_quadratically_from_uniform_flow():
    # no coarse start: the plate at Re_L = 1e4 from u = U everywhere, one LU per step
    r = solve_case({"case": {"kind": "plate"}, "mesh": {"nx": 64, "ny": 32},
                    "solve": {"coarse_levels": 0, "chord": False}})
    h = np.array([max(row[1:4]) for row in r.outcome.history])
    assert r.outcome.status == "converged"
    assert r.outcome.iterations <= 7, h
    # quadratic convergence (Newton's method, Kelley 2003): the last full step squares the error
    # level, so its log-reduction is at least that of the step before it
    lg = np.log10(h)
    assert (lg[-2] - lg[-1]) > (lg[-3] - lg[-2]), lg


def test_chord_steps_save_factorisations():
    base = {"case": {"kind": "cavity"}, "mesh": {"nx": 32, "ny": 32}, "solve": {"coarse_levels": 0}}
    with_chord = solve_case(base)
    without = solve_case({**base, "solve": {"coarse_levels": 0, "chord": False}})
    assert with_chord.outcome.status == without.outcome.status == "converged"
    assert with_chord.outcome.factorisations < without.outcome.factorisations
    # both reach the same solution (the chord only changes the path)
    assert np.allclose(with_chord.outcome.x, without.outcome.x, atol=1e-9)


def test_iteration_limit_is_not_converged_and_keeps_the_history():
    r = solve_case({"case": {"kind": "cavity"}, "mesh": {"nx": 16, "ny": 16},
                    "solve": {"max_iterations": 2, "coarse_levels": 0}})
    assert r.outcome.status == "not_converged"
    assert r.exit_code == 4
    assert len(r.outcome.history) == 3 and "iteration limit" in r.outcome.message
    assert "centreline_u" in r.metrics  # metrics of the unconverged field are still there


def test_divergence_stops_with_its_own_status():
    # central differences without stabilisation on a 16 x 16 cavity at Re = 2000 (cell Reynolds
    # number 125): Newton from rest wanders and the imbalances grow by orders of magnitude; with
    # a growth limit of 100 x the start the run must stop as diverged and keep its history
    r = solve_case({"case": {"kind": "cavity", "reynolds": 2.0e3}, "mesh": {"nx": 16, "ny": 16},
                    "solve": {"coarse_levels": 0, "divergence_limit": 100.0}})
    assert r.outcome.status == "diverged", r.outcome.message
    assert r.exit_code == 5
    assert "exceeds" in r.outcome.message
    h = np.array([max(row[1:4]) for row in r.outcome.history])
    assert h[-1] > 100 * max(h[0], 1.0)
    assert "centreline_u" not in r.metrics  # no metrics from a diverged field


def test_history_columns():
    assert COLUMNS[:5] == ("iteration", "mass_imbalance", "xmom_imbalance", "ymom_imbalance", "newton_update")


def test_monitored_metrics_are_the_metrics_and_missing_where_a_field_has_none():
    from studyflow.fvsolver import metrics

    r = solve_case({"case": {"kind": "step"}, "mesh": {"nx": 60, "ny": 16}})
    got = metrics.monitored(r.problem, *r.fields)
    assert got["reattachment_length"] == r.metrics["reattachment_length"] > 0
    assert np.isnan(got["upper_separation"]) and np.isnan(r.metrics["upper_separation"])  # none at Re = 100
    still = [np.zeros_like(f) for f in r.fields]  # no flow: no wall shear changes sign anywhere
    assert all(np.isnan(v) for v in metrics.monitored(r.problem, *still).values())
