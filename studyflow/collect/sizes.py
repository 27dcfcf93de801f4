"""Representative cell size from a cell count."""

from __future__ import annotations

import numpy as np


def representative_size(measure: float, cells: np.ndarray | float, dim: int) -> np.ndarray:
    """h = (measure / N)^(1/dim): the mean cell length, area or volume taken to the 1/dim power.

    Celik et al. (2008), "Procedure for estimation and reporting of uncertainty due to
    discretization in CFD applications", J. Fluids Eng. 130(7), 078001, eq. (1):
    h = [(1/N) sum dV_i]^(1/3) in 3-D and h = [(1/N) sum dA_i]^(1/2) in 2-D, where the sum of the
    cell volumes (areas) is the domain's ``measure``. Non-positive or missing counts give NaN.
    """
    n = np.asarray(cells, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        h = np.where(n > 0, (float(measure) / n) ** (1.0 / int(dim)), np.nan)
    return h
