"""Least-squares uncertainty (Eca & Hoekstra, J. Comput. Phys. 262 (2014) 104-130).

The paper's own worked examples are not reproduced here: their data are not recalled reliably
enough to type in. The fits are checked against reference libraries (scipy, numpy) and the
procedure against analytic power-law data with and without noise.
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.optimize import curve_fit

from studyflow.analysis.leastsquares import (
    FIRST_SECOND,
    POWER,
    fit_fixed_orders,
    fit_power_law,
    least_squares_uncertainty,
)

H5 = 0.05 * 1.5 ** np.arange(5)  # five levels, ratio 1.5 (invented)


def test_power_fit_matches_scipy_curve_fit():
    # Reference: scipy.optimize.curve_fit (Levenberg-Marquardt) on the same model phi0 + a h^p.
    rng = np.random.default_rng(3)
    phi = 1.3 - 0.4 * H5**1.4 + rng.normal(0, 2e-4, H5.size)
    ref, _ = curve_fit(lambda x, a, b, c: a + b * x**c, H5, phi, p0=[1.3, -0.4, 1.4])
    fit = fit_power_law(H5[None], phi[None])
    assert fit.phi0[0] == pytest.approx(ref[0], rel=1e-7)
    assert fit.coef[0, 0] == pytest.approx(ref[1], rel=1e-5)
    assert fit.order[0] == pytest.approx(ref[2], rel=1e-5)
    resid = phi - (ref[0] + ref[1] * H5 ** ref[2])
    assert fit.sigma[0] == pytest.approx(np.sqrt(np.sum(resid**2) / (5 - 3)), rel=1e-5)


@pytest.mark.parametrize("orders", [(1.0,), (2.0,), (1.0, 2.0)])
def test_fixed_order_fits_match_numpy_lstsq(orders):
    # Reference: numpy.linalg.lstsq on the design matrix [1, h^p1, (h^p2)].
    rng = np.random.default_rng(5)
    phi = 0.8 + 0.3 * H5 + 2.0 * H5**2 + rng.normal(0, 1e-3, H5.size)
    a = np.column_stack([np.ones_like(H5)] + [H5**q for q in orders])
    beta, *_ = np.linalg.lstsq(a, phi, rcond=None)
    fit = fit_fixed_orders(H5[None], phi[None], orders)
    assert fit.phi0[0] == pytest.approx(beta[0], rel=1e-9)
    assert fit.coef[0] == pytest.approx(beta[1:], rel=1e-7)
    s = np.sum((phi - a @ beta) ** 2)
    assert fit.sigma[0] == pytest.approx(np.sqrt(s / (5 - a.shape[1])), rel=1e-7)


def test_exact_power_law_in_band_uses_power_fit_with_fs_125():
    # Analytic data phi0 + C h^p with 0.5 <= p < 2.1: zero scatter, Fs = 1.25, U = 1.25 C h1^p.
    phi = 2.0 + 0.7 * H5**1.7
    res = least_squares_uncertainty(H5[None], phi[None])
    assert res.fit[0] == POWER and res.fs[0] == 1.25
    assert res.order[0] == pytest.approx(1.7, rel=1e-8)
    assert res.extrapolated[0] == pytest.approx(2.0, rel=1e-10)
    assert res.U[0] == pytest.approx(1.25 * 0.7 * H5[0] ** 1.7, rel=1e-6)


def test_order_above_band_falls_back_to_fixed_orders_with_fs_3():
    phi = 2.0 + 0.7 * H5**3  # p = 3 >= 2.1 (analytic data)
    res = least_squares_uncertainty(H5[None], phi[None])
    assert res.order[0] == pytest.approx(3.0, rel=1e-7)
    assert res.fit[0] in ("second", FIRST_SECOND) and res.fs[0] == 3.0
    assert abs(res.extrapolated[0] - 2.0) <= res.U[0]


def test_scattered_data_use_data_range_branch_without_exception():
    phi = np.array([[1.0, 1.1, 0.95, 1.2, 0.8]])  # no convergence pattern (invented)
    res = least_squares_uncertainty(H5[None], phi)
    assert np.isfinite(res.U[0]) and res.U[0] > 0
    assert not res.good_fit[0]  # sigma >= Delta_phi: U = 3 sigma/Delta_phi (...)


def test_constant_data_give_zero_uncertainty():
    res = least_squares_uncertainty(H5[None], np.full((1, 5), 4.2))
    assert res.U[0] == 0.0 and res.extrapolated[0] == 4.2


@settings(max_examples=40, deadline=None)
@given(
    p=st.floats(0.6, 2.0),
    c=st.floats(0.2, 3.0),
    sign=st.sampled_from([-1.0, 1.0]),
    noise=st.floats(1e-6, 2e-3),
    seed=st.integers(0, 2**31 - 1),
    n=st.integers(4, 7),
)
def test_noisy_power_law_recovers_limit_within_its_own_U(p, c, sign, noise, seed, n):
    # phi0 + C h^p plus small noise (relative to the data range): the estimate phi0_hat must
    # satisfy |phi0_hat - phi0| <= U (the property claimed by the procedure; analytic data).
    h = 0.05 * 1.4 ** np.arange(n)
    clean = 1.0 + sign * c * h**p
    rng = np.random.default_rng(seed)
    phi = clean + rng.normal(0.0, noise * np.ptp(clean), n)
    res = least_squares_uncertainty(h[None], phi[None])
    assert abs(res.extrapolated[0] - 1.0) <= res.U[0]
    # The uncertainty is about phi1, so phi1's true error must lie within it as well.
    assert abs(phi[0] - 1.0) <= res.U[0]


def test_vectorised_equals_row_by_row():
    rng = np.random.default_rng(11)
    phi = 1.0 + rng.uniform(0.1, 1.0, (6, 1)) * H5**rng.uniform(0.3, 3.0, (6, 1)) + rng.normal(0, 1e-4, (6, 5))
    h = np.tile(H5, (6, 1))
    all_at_once = least_squares_uncertainty(h, phi)
    for i in range(6):
        one = least_squares_uncertainty(h[i : i + 1], phi[i : i + 1])
        assert one.U[0] == pytest.approx(all_at_once.U[i], rel=1e-12)
        assert one.fit[0] == all_at_once.fit[i]


def test_weighted_fit_matches_scipy_with_sigma_weights():
    # Reference: scipy.optimize.curve_fit with sigma_i = 1/sqrt(w_i) minimises sum w_i r_i^2.
    rng = np.random.default_rng(9)
    phi = 0.7 + 0.9 * H5**1.2 + rng.normal(0, 3e-4, H5.size)
    w = (1 / H5) / np.sum(1 / H5)
    ref, _ = curve_fit(lambda x, a, b, c: a + b * x**c, H5, phi, p0=[0.7, 0.9, 1.2], sigma=1 / np.sqrt(w))
    fit = fit_power_law(H5[None], phi[None], weighted=True)
    assert fit.phi0[0] == pytest.approx(ref[0], rel=1e-7)
    assert fit.order[0] == pytest.approx(ref[2], rel=1e-5)
    fixed = fit_fixed_orders(H5[None], phi[None], (1.0, 2.0), weighted=True)
    a = np.column_stack([np.ones_like(H5), H5, H5**2]) * np.sqrt(w)[:, None]
    beta, *_ = np.linalg.lstsq(a, phi * np.sqrt(w), rcond=None)  # reference: numpy weighted lstsq
    assert fixed.phi0[0] == pytest.approx(beta[0], rel=1e-9)


def test_weighted_option_never_raises_sigma():
    rng = np.random.default_rng(13)
    phi = 1.0 + 0.5 * H5**1.5 + rng.normal(0, 1e-3, (20, 5))
    h = np.tile(H5, (20, 1))
    plain = least_squares_uncertainty(h, phi)
    both = least_squares_uncertainty(h, phi, weighted=True)
    in_band = (plain.fit == POWER) & (both.fit == POWER)
    assert np.all(both.sigma[in_band] <= plain.sigma[in_band] + 1e-15)
    assert np.all(np.isfinite(both.U))
