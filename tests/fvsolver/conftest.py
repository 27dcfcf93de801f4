"""Shared solver runs for the fvsolver tests (each solved once per session, in-process).

Mesh sizes are chosen so the whole solver suite stays well under a minute on two cores.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.integrate import solve_bvp

from fv_support import solve_case


@pytest.fixture(scope="session")
def plate_fine():
    # finest test mesh: 192 x 96 cells, Re_L = 1e4, default domain and stretching
    return solve_case({"case": {"kind": "plate", "reynolds": 1.0e4}, "mesh": {"nx": 192, "ny": 96},
                       "plate": {"stations": [0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9], "profile_stations": [0.5]}})


@pytest.fixture(scope="session")
def cavity_128():
    return solve_case({"case": {"kind": "cavity", "reynolds": 100.0}, "mesh": {"nx": 128, "ny": 128}})


@pytest.fixture(scope="session")
def channel_run():
    # Re = U H / nu = 50 on a channel 10 H long: developed well before x = 8 H
    return solve_case({"case": {"kind": "channel", "reynolds": 50.0}, "mesh": {"nx": 96, "ny": 32}})


@pytest.fixture(scope="session")
def mms_runs():
    return [solve_case({"case": {"kind": "mms", "reynolds": 50.0}, "mesh": {"nx": n, "ny": n}}) for n in (16, 32, 64)]


@pytest.fixture(scope="session")
def blasius():
    """Blasius similarity solution f''' + f f''/2 = 0, f(0) = f'(0) = 0, f'(inf) = 1.

    Solved here with scipy.integrate.solve_bvp on eta in [0, 12]; returns (eta, f, f', f'').
    """

    def rhs(eta, y):
        return np.vstack([y[1], y[2], -0.5 * y[0] * y[2]])

    def bc(ya, yb):
        return np.array([ya[0], ya[1], yb[1] - 1.0])

    eta = np.linspace(0.0, 12.0, 241)
    guess = np.vstack([eta - 1.7 * (1 - np.exp(-eta)), 1 - np.exp(-eta), np.exp(-eta) * 0.33])
    sol = solve_bvp(rhs, bc, eta, guess, tol=1e-10, max_nodes=100000)
    assert sol.success
    fine = np.linspace(0.0, 12.0, 4801)
    y = sol.sol(fine)
    return fine, y[0], y[1], y[2]
