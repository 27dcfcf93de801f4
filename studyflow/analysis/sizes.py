"""Representative cell size, level ordering and refinement ratios, vectorised over groups.

Arrays are shaped ``(n_groups, n_levels)``; every function works on all groups at once.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray


def representative_size(cells: ArrayLike, measure: ArrayLike = 1.0, dim: int = 2) -> NDArray[np.float64]:
    """Representative cell size h = (V / N)^(1/d).

    ``cells`` is the cell count N, ``measure`` the domain area or volume V (any positive constant
    when only ratios matter: the observed order and the relative errors do not depend on it),
    ``dim`` the dimension d. Source: Celik et al., J. Fluids Eng. 130 (2008) 078001, Eq. (1)
    (the simple form with the total measure; the form with summed cell volumes gives the same
    ratio on uniform refinement).
    """
    if dim not in (1, 2, 3):
        raise ValueError(f"dim must be 1, 2 or 3, got {dim!r}")
    n = np.asarray(cells, dtype=float)
    v = np.asarray(measure, dtype=float)
    return (v / n) ** (1.0 / dim)


@dataclass(frozen=True)
class Ordered:
    """Levels of every group sorted finest first; ``order`` maps back to the input columns."""

    h: NDArray[np.float64]
    phi: NDArray[np.float64]
    order: NDArray[np.intp]


def sort_fine_first(h: ArrayLike, phi: ArrayLike) -> Ordered:
    """Sort each row by increasing h, so column 0 is the finest level (index 1 in Celik et al.)."""
    h = np.atleast_2d(np.asarray(h, dtype=float))
    phi = np.atleast_2d(np.asarray(phi, dtype=float))
    if h.shape != phi.shape:
        raise ValueError(f"h and phi must have the same shape, got {h.shape} and {phi.shape}")
    order = np.argsort(h, axis=1, kind="stable")
    return Ordered(np.take_along_axis(h, order, 1), np.take_along_axis(phi, order, 1), order)


def refinement_ratios(h_fine_first: ArrayLike) -> NDArray[np.float64]:
    """Refinement ratios r_{i+1,i} = h_{i+1} / h_i between neighbouring levels (finest first).

    Celik et al. (2008) write r21 = h2/h1 and r32 = h3/h2 with h1 < h2 < h3; a ratio above 1.3 is
    their recommendation, not a requirement here (unequal and non-integer ratios are allowed).
    """
    h = np.atleast_2d(np.asarray(h_fine_first, dtype=float))
    return h[:, 1:] / h[:, :-1]
