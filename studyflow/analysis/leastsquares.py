"""Least-squares numerical-uncertainty estimate for four or more levels, vectorised over groups.

After L. Eca and M. Hoekstra, "A procedure for the estimation of the numerical uncertainty of
CFD calculations based on grid refinement studies", J. Comput. Phys. 262 (2014) 104-130.
What is written here is recalled FROM MEMORY of that paper, not checked against it; details we
are unsure of are marked in the docstrings. The unweighted fits are the default; the weighted
variants (the paper picks whichever of the two has the smaller standard deviation) are
available with ``weighted=True``, their weights and standard deviation as we recall them.

Arrays are ``(n_groups, n_levels)``; every level of a row must be a real level (no padding),
so callers bucket groups by their number of levels.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .sizes import sort_fine_first

P_MIN, P_MAX = 0.05, 8.0  # search interval of the observed order in the power-law fit (our choice)
FS_GOOD, FS_POOR = 1.25, 3.0
P_LOW, P_HIGH = 0.5, 2.1  # observed-order band in which the power-law fit is used with Fs = 1.25

POWER, FIRST, SECOND, FIRST_SECOND = "power", "first", "second", "first+second"


@dataclass(frozen=True)
class Fit:
    """One least-squares fit per group: limit phi0, order (fixed or fitted), coefficients,
    standard deviation sigma and fitted values at each level."""

    name: str
    phi0: NDArray[np.float64]
    order: NDArray[np.float64]
    coef: NDArray[np.float64]  # (n_groups, n_terms): alpha, or (alpha1, alpha2)
    sigma: NDArray[np.float64]
    fitted: NDArray[np.float64]


def level_weights(h: NDArray, weighted: bool) -> NDArray:
    """Weights per level: w_i = (1/h_i) / sum_j (1/h_j) when weighted (finer levels count more;
    Eca & Hoekstra 2014, from memory), else w_i = 1/n_g. They sum to 1 in every row."""
    w = 1.0 / h if weighted else np.ones_like(h)
    return w / w.sum(axis=1, keepdims=True)


def _sigma(s_weighted: NDArray, n_g: int, n_unknowns: int) -> NDArray:
    """sigma = sqrt(n_g sum_i w_i r_i^2 / (n_g - m)); with w_i = 1/n_g this is sqrt(sum r_i^2 / (n_g - m))
    (the weighted form is our reading of the paper, from memory; it reduces to the plain one)."""
    return np.sqrt(n_g * s_weighted / (n_g - n_unknowns))


def _linear_fit_one_power(x: NDArray, phi: NDArray, w: NDArray) -> tuple[NDArray, NDArray, NDArray]:
    """Closed-form weighted least squares of phi = phi0 + alpha x per row (weights summing to 1);
    returns phi0, alpha and S = sum_i w_i r_i^2."""
    xm = np.sum(w * x, axis=1, keepdims=True)
    pm = np.sum(w * phi, axis=1, keepdims=True)
    dx, dp = x - xm, phi - pm
    sxx = np.sum(w * dx * dx, axis=1)
    sxp = np.sum(w * dx * dp, axis=1)
    with np.errstate(divide="ignore", invalid="ignore"):
        alpha = np.where(sxx > 0, sxp / np.where(sxx > 0, sxx, 1.0), 0.0)
    phi0 = pm[:, 0] - alpha * xm[:, 0]
    resid = phi - phi0[:, None] - alpha[:, None] * x
    return phi0, alpha, np.sum(w * resid * resid, axis=1)


def fit_power_law(h: ArrayLike, phi: ArrayLike, p_min: float = P_MIN, p_max: float = P_MAX, n_grid: int = 160,
                  weighted: bool = False) -> Fit:
    """Fit phi_i = phi0 + alpha h_i^p (three unknowns) by least squares, all groups at once.

    Minimises S(phi0, alpha, p) = sum_i (phi_i - phi0 - alpha h_i^p)^2 (Eca & Hoekstra 2014, the
    unweighted form, from memory). For fixed p the problem is linear in (phi0, alpha) and solved
    in closed form; p is found by a grid search over [p_min, p_max] (log-spaced, one loop over
    candidate orders, vectorised over groups) followed by a golden-section refinement per group.
    Standard deviation sigma = sqrt(S / (n_g - 3)) (from memory). ``weighted`` minimises
    sum_i w_i r_i^2 with the weights of ``level_weights`` instead.
    h is scaled by each group's finest size first so that h^p stays well-conditioned.
    """
    o = sort_fine_first(h, phi)
    hs, ph = o.h / o.h[:, :1], o.phi
    w = level_weights(o.h, weighted)
    n_g = hs.shape[1]
    if n_g < 4:
        raise ValueError(f"the least-squares fit needs at least four levels per group, got {n_g}")
    grid = np.geomspace(p_min, p_max, n_grid)
    logh = np.log(hs)
    best_s = np.full(hs.shape[0], np.inf)
    best_k = np.zeros(hs.shape[0], dtype=np.intp)
    for k, p in enumerate(grid):
        _, _, s = _linear_fit_one_power(np.exp(p * logh), ph, w)
        better = s < best_s
        best_s = np.where(better, s, best_s)
        best_k = np.where(better, k, best_k)
    lo = np.log(grid[np.maximum(best_k - 1, 0)])
    hi = np.log(grid[np.minimum(best_k + 1, n_grid - 1)])

    def cost(logp: NDArray) -> NDArray:
        return _linear_fit_one_power(np.exp(np.exp(logp)[:, None] * logh), ph, w)[2]

    g = 0.5 * (np.sqrt(5.0) - 1.0)
    a, b = hi - g * (hi - lo), lo + g * (hi - lo)
    fa, fb = cost(a), cost(b)
    for _ in range(60):
        left = fa < fb
        hi = np.where(left, b, hi)
        lo = np.where(left, lo, a)
        b_new = np.where(left, a, lo + g * (hi - lo))
        a_new = np.where(left, hi - g * (hi - lo), b)
        fb_new = np.where(left, fa, np.nan)
        fa_new = np.where(left, np.nan, fb)
        need_a, need_b = left, ~left
        fa_new = np.where(need_a, cost(a_new), fa_new)
        fb_new = np.where(need_b, cost(b_new), fb_new)
        a, b, fa, fb = a_new, b_new, fa_new, fb_new
    p = np.exp(0.5 * (lo + hi))
    x = np.exp(p[:, None] * logh)
    phi0, alpha, s = _linear_fit_one_power(x, ph, w)
    fitted = phi0[:, None] + alpha[:, None] * x
    # Undo the scaling of h: alpha (h/h1)^p = (alpha / h1^p) h^p.
    coef = (alpha / o.h[:, 0] ** p)[:, None]
    sigma = _sigma(s, n_g, 3)
    return Fit(POWER, phi0, p, coef, sigma, np.take_along_axis(fitted, np.argsort(o.order, axis=1), 1))


def fit_fixed_orders(h: ArrayLike, phi: ArrayLike, orders: tuple[float, ...], weighted: bool = False) -> Fit:
    """Fit phi_i = phi0 + sum_k alpha_k h_i^(p_k) with fixed orders p_k, all groups at once.

    Eca & Hoekstra (2014) use, from memory: first order (p = 1), second order (p = 2) and the
    two-term first+second order expansion alpha1 h + alpha2 h^2. Solved by batched normal
    equations on h scaled by the finest size. sigma = sqrt(S / (n_g - 1 - len(orders)));
    ``weighted`` as in ``fit_power_law``.
    """
    o = sort_fine_first(h, phi)
    h1 = o.h[:, :1]
    hs, ph = o.h / h1, o.phi
    n_g = hs.shape[1]
    m = 1 + len(orders)
    if n_g <= m:
        raise ValueError(f"a fit with {m} unknowns needs more than {m} levels, got {n_g}")
    w = level_weights(o.h, weighted)
    design = np.stack([np.ones_like(hs)] + [hs**q for q in orders], axis=2)  # (G, L, m)
    ata = np.einsum("glm,gl,gln->gmn", design, w, design)
    aty = np.einsum("glm,gl,gl->gm", design, w, ph)
    beta = np.linalg.solve(ata, aty[..., None])[..., 0]
    fitted = np.einsum("glm,gm->gl", design, beta)
    s = np.sum(w * (ph - fitted) ** 2, axis=1)
    coef = beta[:, 1:] / np.stack([h1[:, 0] ** q for q in orders], axis=1)
    name = {(1.0,): FIRST, (2.0,): SECOND, (1.0, 2.0): FIRST_SECOND}.get(tuple(float(q) for q in orders), "fixed")
    order = np.full(ph.shape[0], float(orders[0]) if len(orders) == 1 else np.nan)
    return Fit(name, beta[:, 0], order, coef, _sigma(s, n_g, m),
               np.take_along_axis(fitted, np.argsort(o.order, axis=1), 1))


@dataclass(frozen=True)
class LeastSquares:
    """Least-squares uncertainty of the finest level per group.

    ``fit`` names the fit used; ``order`` is the observed order of the power-law fit;
    ``extrapolated`` the phi0 of the fit used; ``error`` the error estimate eps = |fit(h1) - phi0|;
    ``data_range`` Delta_phi; ``fs`` the safety factor; ``U`` the uncertainty of phi1.
    """

    fit: NDArray[np.str_]
    order: NDArray[np.float64]
    extrapolated: NDArray[np.float64]
    sigma: NDArray[np.float64]
    data_range: NDArray[np.float64]
    error: NDArray[np.float64]
    fs: NDArray[np.float64]
    U: NDArray[np.float64]
    good_fit: NDArray[np.bool_]


def _smaller_sigma(a: Fit, b: Fit) -> Fit:
    """Per group, whichever of two fits of the same form has the smaller standard deviation."""
    take_b = b.sigma < a.sigma
    pick = lambda x, y: np.where(take_b.reshape((-1,) + (1,) * (np.ndim(x) - 1)), y, x)
    return Fit(a.name, pick(a.phi0, b.phi0), pick(a.order, b.order), pick(a.coef, b.coef),
               pick(a.sigma, b.sigma), pick(a.fitted, b.fitted))


def _fit_both(fit: Callable[..., Fit], *args: object, weighted: bool) -> Fit:
    plain = fit(*args)
    return _smaller_sigma(plain, fit(*args, weighted=True)) if weighted else plain


def least_squares_uncertainty(
    h: ArrayLike, phi: ArrayLike, p_low: float = P_LOW, p_high: float = P_HIGH, weighted: bool = False
) -> LeastSquares:
    """Uncertainty of the finest level by the least-squares procedure of Eca & Hoekstra (2014).

    From memory of the paper, and where marked our own reading:
    1. Fit phi = phi0 + alpha h^p; its p is the observed order.
    2. If p_low <= p < p_high (0.5 and 2.1 for formally second-order methods) the error estimate
       is that fit's eps = |alpha h1^p|. Otherwise (p < 0.5, p >= 2.1, or no interior optimum)
       the fixed-order fits are used: for p >= 2.1 the best of second and first+second order,
       for p < 0.5 the best of first, second and first+second order, "best" meaning the
       smallest standard deviation. (The exact candidate sets per branch are our reading; the
       paper's choice by standard deviation is as recalled.)
    3. Data range Delta_phi = (max phi - min phi) / (n_g - 1) (from memory).
    4. If sigma < Delta_phi: U = Fs eps + sigma + |phi1 - phi_fit(h1)|, with Fs = 1.25 when the
       power-law fit was used in its band and Fs = 3 otherwise;
       else U = 3 sigma / Delta_phi (eps + sigma + |phi1 - phi_fit(h1)|).
    Groups whose data are all equal get U = 0 with the power fit reported.
    ``weighted`` also makes every fit with the weights of ``level_weights`` and keeps, per group
    and fit form, the one with the smaller standard deviation (as the paper does, from memory).
    """
    o = sort_fine_first(h, phi)
    hs, ph = o.h, o.phi
    n_g = hs.shape[1]
    power = _fit_both(fit_power_law, hs, ph, weighted=weighted)
    p = power.order
    candidates = [_fit_both(fit_fixed_orders, hs, ph, (1.0,), weighted=weighted),
                  _fit_both(fit_fixed_orders, hs, ph, (2.0,), weighted=weighted)]
    if n_g > 3:
        candidates.append(_fit_both(fit_fixed_orders, hs, ph, (1.0, 2.0), weighted=weighted))
    sig = np.stack([c.sigma for c in candidates], axis=1)  # (G, n_candidates)
    allowed_high = np.array([c.name in (SECOND, FIRST_SECOND) for c in candidates])
    best_high = np.argmin(np.where(allowed_high, sig, np.inf), axis=1)
    best_low = np.argmin(sig, axis=1)
    in_band = (p >= p_low) & (p < p_high)
    choice = np.where(in_band, -1, np.where(p >= p_high, best_high, best_low))

    names = np.array([POWER] + [c.name for c in candidates])
    phi0_all = np.stack([power.phi0] + [c.phi0 for c in candidates], axis=1)
    sigma_all = np.stack([power.sigma] + [c.sigma for c in candidates], axis=1)
    fit1_all = np.stack([power.fitted[np.arange(len(p)), 0]] + [c.fitted[np.arange(len(p)), 0] for c in candidates], axis=1)
    pick = (choice + 1)[:, None]
    phi0 = np.take_along_axis(phi0_all, pick, 1)[:, 0]
    sigma = np.take_along_axis(sigma_all, pick, 1)[:, 0]
    fit1 = np.take_along_axis(fit1_all, pick, 1)[:, 0]
    # power.fitted is in input order; sorted input here means column 0 is the finest level.
    phi1 = ph[:, 0]
    eps = np.abs(fit1 - phi0)
    data_range = (ph.max(axis=1) - ph.min(axis=1)) / (n_g - 1)
    good = sigma < data_range
    fs = np.where(in_band & good, FS_GOOD, FS_POOR)
    base = eps + sigma + np.abs(phi1 - fit1)
    with np.errstate(divide="ignore", invalid="ignore"):
        U = np.where(good, fs * eps + sigma + np.abs(phi1 - fit1), FS_POOR * sigma / data_range * base)
    flat = data_range == 0
    U = np.where(flat, 0.0, U)
    return LeastSquares(
        fit=names[choice + 1], order=p, extrapolated=np.where(flat, phi1, phi0), sigma=sigma,
        data_range=data_range, error=np.where(flat, 0.0, eps), fs=fs, U=U, good_fit=good | flat,
    )
