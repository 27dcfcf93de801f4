"""Two- and three-level grid-convergence procedures, vectorised over many groups at once.

Notation follows Celik et al., "Procedure for estimation and reporting of uncertainty due to
discretization in CFD applications", J. Fluids Eng. 130 (2008) 078001: level 1 is the finest,
h1 < h2 < h3, r21 = h2/h1, r32 = h3/h2, eps21 = phi2 - phi1, eps32 = phi3 - phi2.
Every array argument has shape ``(n_groups,)`` or ``(n_groups, n_levels)``; results are frozen
dataclasses of arrays, one entry per group.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .sizes import refinement_ratios, sort_fine_first

MONOTONIC = "monotonic"
OSCILLATORY = "oscillatory"
DIVERGENT = "divergent"
INDETERMINATE = "indeterminate"

FS_THREE_LEVEL = 1.25  # Celik et al. (2008): safety factor with three or more grids
FS_TWO_LEVEL = 3.0  # Roache: safety factor when the order is assumed, not observed
DEFAULT_RTOL = 1e-12  # differences below rtol * max|phi| are rounding, not mesh dependence

_P_LOW, _P_HIGH = 1e-8, 100.0  # bracket of the fallback root search on the apparent order


def _f(x: ArrayLike) -> NDArray[np.float64]:
    return np.asarray(x, dtype=float)


@dataclass(frozen=True)
class Convergence:
    """Convergence class per group.

    ``kind`` is one of monotonic, oscillatory, divergent, indeterminate; ``R = eps21/eps32``;
    ``flat`` marks groups where both differences are below the noise threshold (no discernible
    mesh dependence); ``tiny`` is the threshold used.
    """

    kind: NDArray[np.str_]
    R: NDArray[np.float64]
    flat: NDArray[np.bool_]
    tiny: NDArray[np.float64]


def noise_threshold(phi: ArrayLike, noise: ArrayLike | None = None, rtol: float = DEFAULT_RTOL) -> NDArray[np.float64]:
    """Absolute threshold below which a difference between levels is not resolved.

    The larger of ``rtol * max_i |phi_i|`` (rounding of the stored values) and the iterative noise
    (an absolute estimate of the iterative error, per group) when given. Our documented choice.
    """
    phi = np.atleast_2d(_f(phi))
    tiny = rtol * np.max(np.abs(phi), axis=1)
    if noise is not None:
        tiny = np.fmax(tiny, np.broadcast_to(_f(noise), tiny.shape))
    return tiny


def classify_convergence(
    eps21: ArrayLike, eps32: ArrayLike, r21: ArrayLike, r32: ArrayLike, tiny: ArrayLike
) -> Convergence:
    """Class of convergence from the ratio R = eps21 / eps32.

    With equal ratios this is the usual classification (Stern et al., J. Fluids Eng. 123 (2001)
    793-802, from memory): 0 < R < 1 monotonic convergence, -1 < R < 0 oscillatory convergence,
    |R| >= 1 divergence. For unequal ratios the monotonic bound moves: exact data
    phi = phi0 + C h^p give 1/R = r21^p (r32^p - 1)/(r21^p - 1), which tends to ln r32 / ln r21
    as p -> 0+ and grows with p, so a positive order exists exactly when
    0 < R < ln r21 / ln r32 (our derivation; it reduces to 0 < R < 1 for r21 = r32). The
    oscillatory bound |R| < 1 is unchanged (1/|R| = r21^p (r32^p + 1)/(r21^p + 1) -> 1 as p -> 0).
    A difference with magnitude at or below ``tiny`` makes the group indeterminate (Celik et al.
    2008 note the procedure fails when a difference is near zero); when both are, ``flat``.
    """
    eps21, eps32, r21, r32, tiny = map(_f, (eps21, eps32, r21, r32, tiny))
    small21 = np.abs(eps21) <= tiny
    small32 = np.abs(eps32) <= tiny
    with np.errstate(divide="ignore", invalid="ignore"):
        R = np.where(eps32 != 0, eps21 / np.where(eps32 != 0, eps32, 1.0), np.nan)
        bound = np.log(r21) / np.log(r32)
    kind = np.select(
        [small21 | small32, (R > 0) & (R < bound), (R < 0) & (R > -1)],
        [INDETERMINATE, MONOTONIC, OSCILLATORY],
        default=DIVERGENT,
    )
    return Convergence(kind=kind.astype("<U13"), R=R, flat=small21 & small32, tiny=tiny)


@dataclass(frozen=True)
class ApparentOrder:
    """Apparent order per group; ``iterations`` of the fixed-point loop, -1 where the bracketed
    fallback was used, 0 where no order was sought (NaN order)."""

    order: NDArray[np.float64]
    iterations: NDArray[np.int64]


def _q(p: NDArray, l21: NDArray, l32: NDArray, s: NDArray) -> NDArray:
    """q(p) = ln((r21^p - s) / (r32^p - s)), written with expm1 / logaddexp so small p stays exact."""
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        mono = np.log(np.expm1(p * l21)) - np.log(np.expm1(p * l32))
        osc = np.logaddexp(p * l21, 0.0) - np.logaddexp(p * l32, 0.0)
    return np.where(s > 0, mono, osc)


def apparent_order(
    eps21: ArrayLike,
    eps32: ArrayLike,
    r21: ArrayLike,
    r32: ArrayLike,
    mask: ArrayLike | None = None,
    max_iter: int = 200,
    tol: float = 1e-14,
) -> ApparentOrder:
    """Apparent (observed) order p from three levels, by fixed-point iteration.

    p = |ln|eps32/eps21| + q(p)| / ln r21,  q(p) = ln((r21^p - s)/(r32^p - s)),  s = sign(eps32/eps21)
    (Celik et al. 2008, Eqs. (3a)-(3c), numbering from memory); with r21 = r32, q = 0 and p
    follows directly. The iteration starts from q = 0. It is a contraction only when |q'(p)| < ln r21, which fails for
    strongly unequal ratios (e.g. r21 = 1.1, r32 = 4); groups that have not converged after
    ``max_iter`` steps are solved instead by bisection in ln p on the same equation written as
    p ln r21 - q(p) = ln|eps32/eps21|, whose left side increases with p (our safeguard, not part
    of the paper). ``mask`` selects the groups to solve (convergent ones); others get NaN.
    """
    eps21, eps32, r21, r32 = map(_f, (eps21, eps32, r21, r32))
    if mask is None:
        mask = (eps21 != 0) & (eps32 != 0)
    mask = np.asarray(mask, dtype=bool) & (eps21 != 0) & (eps32 != 0)
    l21, l32 = np.log(r21), np.log(r32)
    with np.errstate(divide="ignore", invalid="ignore"):
        a = np.log(np.abs(eps32 / np.where(eps21 != 0, eps21, 1.0)))
        s = np.sign(eps32 * eps21)
        p = np.where(mask, np.abs(a) / l21, np.nan)
    iterations = np.zeros(p.shape, dtype=np.int64)
    active = mask & np.isfinite(p)
    for _ in range(max_iter):
        if not active.any():
            break
        with np.errstate(invalid="ignore"):
            p_new = np.abs(a + _q(p, l21, l32, s)) / l21
        step_done = np.abs(p_new - p) <= tol * np.fmax(1.0, np.abs(p_new))
        p = np.where(active, p_new, p)
        iterations = np.where(active, iterations + 1, iterations)
        active = active & ~step_done & np.isfinite(p)
    fallback = mask & (active | ~np.isfinite(p) | (p <= 0))
    if fallback.any():
        p = np.where(fallback, _bisect_order(a, l21, l32, s, fallback), p)
        iterations = np.where(fallback, -1, iterations)
    return ApparentOrder(order=np.where(mask, p, np.nan), iterations=iterations)


def _bisect_order(a: NDArray, l21: NDArray, l32: NDArray, s: NDArray, mask: NDArray) -> NDArray:
    lo = np.full(a.shape, np.log(_P_LOW))
    hi = np.full(a.shape, np.log(_P_HIGH))

    def residual(logp: NDArray) -> NDArray:
        p = np.exp(logp)
        return p * l21 - _q(p, l21, l32, s) - a

    ok = mask & (residual(lo) < 0) & (residual(hi) > 0)
    for _ in range(64):  # halves a bracket of ln(1e10) to below double precision
        mid = 0.5 * (lo + hi)
        up = residual(mid) > 0
        hi = np.where(up, mid, hi)
        lo = np.where(up, lo, mid)
    return np.where(ok, np.exp(0.5 * (lo + hi)), np.nan)


def richardson_extrapolate(phi_fine: ArrayLike, phi_coarse: ArrayLike, r: ArrayLike, p: ArrayLike) -> NDArray[np.float64]:
    """phi_ext = (r^p phi_fine - phi_coarse) / (r^p - 1)  (Celik et al. 2008, Eq. (4), numbering
    from memory), evaluated as phi_fine + (phi_fine - phi_coarse) / (r^p - 1) with expm1 to keep precision."""
    phi_fine, phi_coarse, r, p = map(_f, (phi_fine, phi_coarse, r, p))
    with np.errstate(divide="ignore", invalid="ignore"):
        return phi_fine + (phi_fine - phi_coarse) / np.expm1(p * np.log(r))


def _rel(num: NDArray, den: NDArray) -> NDArray:
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(den != 0, np.abs(num / np.where(den != 0, den, 1.0)), np.inf)


def gci_relative(e_a: ArrayLike, r: ArrayLike, p: ArrayLike, fs: float) -> NDArray[np.float64]:
    """Relative GCI, Fs e_a / (r^p - 1) with e_a = |(phi_fine - phi_coarse)/phi_fine| (Celik et al.
    2008, Eq. (5c), numbering from memory); r^p - 1 through expm1 to keep precision for small p."""
    e_a, r, p = map(_f, (e_a, r, p))
    with np.errstate(divide="ignore", invalid="ignore"):
        return fs * e_a / np.expm1(p * np.log(r))


def gci_absolute(phi_fine: ArrayLike, phi_coarse: ArrayLike, r: ArrayLike, p: ArrayLike, fs: float) -> NDArray[np.float64]:
    """Absolute GCI, Fs |phi_coarse - phi_fine| / (r^p - 1): the relative GCI of Celik et al.
    (2008), Eq. (5c) as we recall the numbering, times |phi_fine|, computed directly so it stays
    finite when phi_fine = 0."""
    phi_fine, phi_coarse, r, p = map(_f, (phi_fine, phi_coarse, r, p))
    with np.errstate(divide="ignore", invalid="ignore"):
        return fs * np.abs(phi_coarse - phi_fine) / np.expm1(p * np.log(r))


@dataclass(frozen=True)
class ThreeLevel:
    """Three-level results per group (finest three levels). Relative errors are fractions.

    ``U`` is the absolute GCI of the fine level, ``asymptotic_ratio`` GCI32 / (r21^p GCI21).
    """

    h1: NDArray[np.float64]
    phi1: NDArray[np.float64]
    r21: NDArray[np.float64]
    r32: NDArray[np.float64]
    eps21: NDArray[np.float64]
    eps32: NDArray[np.float64]
    convergence: Convergence
    order: NDArray[np.float64]
    iterations: NDArray[np.int64]
    extrapolated: NDArray[np.float64]
    extrapolated32: NDArray[np.float64]
    e_a: NDArray[np.float64]
    e_a32: NDArray[np.float64]
    e_ext: NDArray[np.float64]
    gci_fine: NDArray[np.float64]
    gci_medium: NDArray[np.float64]
    asymptotic_ratio: NDArray[np.float64]
    U: NDArray[np.float64]


def asymptotic_ratio(gci_fine: ArrayLike, gci_medium: ArrayLike, r21: ArrayLike, p: ArrayLike) -> NDArray[np.float64]:
    """Roache's asymptotic-range check GCI23 / (r21^p GCI12), about 1 in the asymptotic range.

    Source: P. J. Roache, Verification and Validation in Computational Science and Engineering
    (Hermosa, 1998), from memory; some published printouts give the inverse ratio.
    With relative GCIs and p observed on the same three monotonic levels the ratio equals
    |phi1/phi2| identically (substitute the order equation), so on three levels it says little;
    it is informative when p is fixed (formal order) or observed on other levels.
    """
    gci_fine, gci_medium, r21, p = map(_f, (gci_fine, gci_medium, r21, p))
    with np.errstate(divide="ignore", invalid="ignore"):
        return gci_medium / (np.exp(p * np.log(r21)) * gci_fine)


def three_level(
    h: ArrayLike,
    phi: ArrayLike,
    noise: ArrayLike | None = None,
    fs: float = FS_THREE_LEVEL,
    rtol: float = DEFAULT_RTOL,
) -> ThreeLevel:
    """Celik et al. (2008) three-level procedure on the three finest levels of every group.

    Steps: sort levels by h, r21 and r32, eps21 and eps32, convergence class, apparent order p
    (monotonic and oscillatory groups only), phi_ext21 = (r21^p phi1 - phi2)/(r21^p - 1),
    e_a21 = |(phi1 - phi2)/phi1|, e_ext21 = |(phi_ext21 - phi1)/phi_ext21|,
    GCI_fine21 = Fs e_a21 / (r21^p - 1) with Fs = 1.25, and the same on levels 2-3 for GCI32.
    Divergent and indeterminate groups get NaN order and NaN GCI.
    """
    o = sort_fine_first(h, phi)
    if o.h.shape[1] < 3:
        raise ValueError(f"three_level needs at least three levels per group, got {o.h.shape[1]}")
    hs, ph = o.h[:, :3], o.phi[:, :3]
    r = refinement_ratios(hs)
    r21, r32 = r[:, 0], r[:, 1]
    phi1, phi2, phi3 = ph[:, 0], ph[:, 1], ph[:, 2]
    eps21, eps32 = phi2 - phi1, phi3 - phi2
    conv = classify_convergence(eps21, eps32, r21, r32, noise_threshold(ph, noise, rtol))
    solved = (conv.kind == MONOTONIC) | (conv.kind == OSCILLATORY)
    ao = apparent_order(eps21, eps32, r21, r32, mask=solved)
    p = ao.order
    ext21 = richardson_extrapolate(phi1, phi2, r21, p)
    ext32 = richardson_extrapolate(phi2, phi3, r32, p)
    e_a, e_a32 = _rel(eps21, phi1), _rel(eps32, phi2)
    e_ext = _rel(ext21 - phi1, ext21)
    gci_fine, gci_medium = gci_relative(e_a, r21, p, fs), gci_relative(e_a32, r32, p, fs)
    return ThreeLevel(
        h1=hs[:, 0], phi1=phi1, r21=r21, r32=r32, eps21=eps21, eps32=eps32, convergence=conv,
        order=p, iterations=ao.iterations, extrapolated=ext21, extrapolated32=ext32,
        e_a=e_a, e_a32=e_a32, e_ext=e_ext, gci_fine=gci_fine, gci_medium=gci_medium,
        asymptotic_ratio=asymptotic_ratio(gci_fine, gci_medium, r21, p),
        U=gci_absolute(phi1, phi2, r21, p, fs),
    )


@dataclass(frozen=True)
class TwoLevel:
    """Two-level results per group, with the order assumed (formal), not observed."""

    h1: NDArray[np.float64]
    phi1: NDArray[np.float64]
    r21: NDArray[np.float64]
    eps21: NDArray[np.float64]
    flat: NDArray[np.bool_]
    extrapolated: NDArray[np.float64]
    e_a: NDArray[np.float64]
    e_ext: NDArray[np.float64]
    gci_fine: NDArray[np.float64]
    U: NDArray[np.float64]


def two_level(
    h: ArrayLike,
    phi: ArrayLike,
    formal_order: ArrayLike,
    noise: ArrayLike | None = None,
    fs: float = FS_TWO_LEVEL,
    rtol: float = DEFAULT_RTOL,
) -> TwoLevel:
    """Two-level GCI with the formal order p_f: GCI = Fs e_a21 / (r21^p_f - 1), Fs = 3.

    Source: Roache, J. Fluids Eng. 116 (1994) 405-413 (Fs = 3 for two-grid studies), from memory.
    The extrapolated value uses p_f in phi_ext = (r^p_f phi1 - phi2)/(r^p_f - 1).
    Uses the two finest levels of every group.
    """
    o = sort_fine_first(h, phi)
    if o.h.shape[1] < 2:
        raise ValueError(f"two_level needs at least two levels per group, got {o.h.shape[1]}")
    h1, h2 = o.h[:, 0], o.h[:, 1]
    phi1, phi2 = o.phi[:, 0], o.phi[:, 1]
    r21 = h2 / h1
    p = np.broadcast_to(_f(formal_order), phi1.shape)
    eps21 = phi2 - phi1
    flat = np.abs(eps21) <= noise_threshold(o.phi[:, :2], noise, rtol)
    ext = richardson_extrapolate(phi1, phi2, r21, p)
    e_a = _rel(eps21, phi1)
    gci = gci_relative(e_a, r21, p, fs)
    return TwoLevel(
        h1=h1, phi1=phi1, r21=r21, eps21=eps21, flat=flat, extrapolated=ext, e_a=e_a,
        e_ext=_rel(ext - phi1, ext), gci_fine=gci, U=gci_absolute(phi1, phi2, r21, p, fs),
    )
