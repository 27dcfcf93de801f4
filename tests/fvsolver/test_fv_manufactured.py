"""Code verification with the method of manufactured solutions (Roache, J. Fluids Eng. 124, 2002).

The manufactured solution is stated in studyflow/fvsolver/manufactured.py. A second-order
scheme must show an observed order p = ln(e_2h / e_h) / ln 2 near 2 on meshes refined by 2
(Roache 1998, "Verification and Validation in Computational Science and Engineering").
"""

from __future__ import annotations

import numpy as np
import pytest
from fv_support import solve_case

from studyflow.fvsolver import manufactured


def _orders(runs, name):
    e = np.array([r.metrics["errors"][name]["l2"] for r in runs])
    return np.log(e[:-1] / e[1:]) / np.log(2.0), e


@pytest.mark.parametrize("name", ["u", "v"])
def test_observed_order_of_velocity_is_two(mms_runs, name):
    p, e = _orders(mms_runs, name)
    assert np.all((p > 1.9) & (p < 2.1)), f"observed order of the L2 error of {name}: {p} (errors {e})"


def test_observed_order_on_stretched_meshes():
    # the same check on meshes stretched toward all four sides (size ratio 4), as the plate uses
    runs = [solve_case({"case": {"kind": "mms"}, "mesh": {"nx": n, "ny": n, "stretch_x": 4.0, "stretch_y": 4.0}})
            for n in (16, 32, 64)]
    for name in ("u", "v"):
        p, e = _orders(runs, name)
        assert np.all((p > 1.9) & (p < 2.1)), f"stretched meshes, observed order of {name}: {p} (errors {e})"


def test_source_terms_match_finite_differences_of_the_solution():
    # independent check of the hand-derived sources: central differences of the stated fields
    x, y, h, nu = 0.37, 0.61, 1e-4, 0.02
    u = lambda a, b: manufactured.velocity(a, b)[0]
    v = lambda a, b: manufactured.velocity(a, b)[1]
    p = manufactured.pressure

    def d(f, i):
        return (f(x + h, y) - f(x - h, y)) / (2 * h) if i == 0 else (f(x, y + h) - f(x, y - h)) / (2 * h)

    def lap(f):
        return (f(x + h, y) + f(x - h, y) + f(x, y + h) + f(x, y - h) - 4 * f(x, y)) / h**2

    su = u(x, y) * d(u, 0) + v(x, y) * d(u, 1) + d(p, 0) - nu * lap(u)
    sv = u(x, y) * d(v, 0) + v(x, y) * d(v, 1) + d(p, 1) - nu * lap(v)
    assert abs(su - manufactured.source_u(x, y, nu)) < 1e-5
    assert abs(sv - manufactured.source_v(x, y, nu)) < 1e-5
    assert abs(d(u, 0) + d(v, 1)) < 1e-7  # divergence-free
