"""Structured rectilinear meshes with geometric stretching.

Every stretched segment uses the exponential map x(s) = L (e^{a s} - 1) / (e^a - 1) with s
uniform on [0, 1], so consecutive cells grow by the constant factor q = e^{a/n}: a geometric
progression. The map, not the per-cell ratio, is held fixed across a mesh family, so a mesh
with twice the cells contains every node of the coarser one (nested meshes, the usual
requirement of a grid-convergence study, Roache 1998 "Verification and Validation in
Computational Science and Engineering").
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


def exp_nodes(length: float, n: int, a: float) -> np.ndarray:
    """Nodes 0..length of n cells, x_k = length (e^{a k/n} - 1)/(e^a - 1); a = 0 is uniform.

    a > 0 clusters the cells toward 0, a < 0 toward ``length``.
    """
    s = np.arange(n + 1) / n
    if abs(a) < 1e-12:
        return length * s
    return length * np.expm1(a * s) / np.expm1(a)


def first_fraction(a: float) -> float:
    """Limit n->inf of n * (first cell)/length for the map above: a / (e^a - 1)."""
    return 1.0 if abs(a) < 1e-12 else a / np.expm1(a)


def stretch_to_a(stretch: float) -> float:
    """Map parameter from the end-to-end size ratio e^a (far-end cell / near-end cell)."""
    return float(np.log(stretch))


def a_for_first_fraction(target: float) -> float:
    """Solve a/(e^a - 1) = target for a (target > 0): matches a first cell size."""
    if abs(target - 1.0) < 1e-12:
        return 0.0
    # a/(e^a - 1) falls monotonically in a: bisection (scipy.optimize would cost a slow import
    # in every solver run)
    lo, hi = -50.0, 50.0
    for _ in range(200):
        mid = 0.5 * (lo + hi)
        if first_fraction(mid) > target:
            lo = mid
        else:
            hi = mid
        if hi - lo < 1e-14:
            break
    return 0.5 * (lo + hi)


def clustered(x0: float, x1: float, n: int, stretch: float, toward: str) -> np.ndarray:
    """n cells on [x0, x1] clustered toward 'low', 'high' or 'both' ends (size ratio ``stretch``)."""
    length = x1 - x0
    a = stretch_to_a(stretch)
    if toward == "low":
        return x0 + exp_nodes(length, n, a)
    if toward == "high":
        return x1 - exp_nodes(length, n, a)[::-1]
    if toward == "both":
        if n % 2:
            raise ValueError("two-sided clustering needs an even number of cells")
        half = exp_nodes(0.5 * length, n // 2, a)
        return np.concatenate([x0 + half, (x1 - half[::-1])[1:]])
    raise ValueError(f"unknown clustering {toward!r}")


def join(*parts: np.ndarray) -> np.ndarray:
    """Concatenate node arrays that share end points."""
    out = [parts[0]]
    for p in parts[1:]:
        out.append(p[1:])
    return np.concatenate(out)


@dataclass(frozen=True)
class Grid:
    """Cell faces ``xf`` (nx+1) and ``yf`` (ny+1) of a rectilinear MAC mesh.

    p lives at cell centres (nx, ny), u on vertical faces (nx+1, ny), v on horizontal faces
    (nx, ny+1).
    """

    xf: np.ndarray
    yf: np.ndarray

    @property
    def nx(self) -> int:
        return len(self.xf) - 1

    @property
    def ny(self) -> int:
        return len(self.yf) - 1

    @property
    def cells(self) -> int:
        return self.nx * self.ny

    @property
    def xc(self) -> np.ndarray:
        return 0.5 * (self.xf[1:] + self.xf[:-1])

    @property
    def yc(self) -> np.ndarray:
        return 0.5 * (self.yf[1:] + self.yf[:-1])

    @property
    def dx(self) -> np.ndarray:
        return np.diff(self.xf)

    @property
    def dy(self) -> np.ndarray:
        return np.diff(self.yf)
