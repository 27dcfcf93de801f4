"""The Jacobian is exact: for a quadratic map R, the central difference
(R(x + e d) - R(x - e d)) / (2 e) equals J(x) d exactly (Taylor's theorem, no third derivative),
so a mismatch beyond round-off would be a Jacobian error, not a truncation error."""

from __future__ import annotations

import numpy as np

from studyflow.fvsolver import cases, config
from studyflow.fvsolver.discretise import discretise


def _system(data):
    prob = cases.build(config.parse(data))
    return discretise(prob.grid, prob.bounds, prob.nu, prob.source_u, prob.source_v, prob.pin_level)


def test_jacobian_matches_central_difference_on_every_case_kind():
    rng = np.random.default_rng(3)
    for kind, mesh in (("plate", (16, 8)), ("cavity", (8, 8)), ("channel", (12, 6)), ("mms", (8, 8)),
                       ("step", (12, 8))):
        d = _system({"case": {"kind": kind}, "mesh": {"nx": mesh[0], "ny": mesh[1]}})
        x = rng.normal(size=d.layout.n)
        step = rng.normal(size=d.layout.n)
        eps = 0.3  # any size works for a quadratic map
        fd = (d.system.residual(x + eps * step) - d.system.residual(x - eps * step)) / (2 * eps)
        jd = d.system.jacobian(x) @ step
        assert np.allclose(fd, jd, rtol=1e-10, atol=1e-10 * np.abs(jd).max()), kind


def test_uniform_flow_satisfies_continuity():
    # u = const, v = 0 has zero net flux out of every cell (divergence theorem)
    d = _system({"case": {"kind": "channel"}, "mesh": {"nx": 12, "ny": 6}})
    u, v, p = (np.ones(((13, 6))), np.zeros((12, 7)), np.zeros((12, 6)))
    r = d.system.residual(np.concatenate([u.ravel(), v.ravel(), p.ravel()]))
    assert np.abs(r[d.mass_rows]).max() < 1e-14
