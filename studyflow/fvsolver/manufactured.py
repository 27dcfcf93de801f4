"""The manufactured solution of the ``mms`` case (method of manufactured solutions: Roache,
"Code Verification by the Method of Manufactured Solutions", J. Fluids Eng. 124, 2002).

Stream function, separable and vanishing on the boundary of the unit square:

    psi(x, y) = c A(x) B(y),   A = (1 + x) sin(pi x),   B = (2 + y) sin(pi y),   c = 0.1
    u = psi_y = c A B',   v = -psi_x = -c A' B,   p = 0.5 cos(pi x) sin(pi y)

so u is divergence-free, the normal velocity is zero on every side while the tangential one
is not, and the vorticity is not a function of psi: the convective term is not a pressure
gradient and a wrong convection operator cannot hide in the pressure (the Taylor-Green field
would let it). The source terms are s = (u.grad)u + grad p - nu lap u.
"""

from __future__ import annotations

import numpy as np

C = 0.1
PI = np.pi


def _factor(t: np.ndarray, k: float) -> tuple[np.ndarray, ...]:
    """f = (k + t) sin(pi t) and its first three derivatives (product rule)."""
    s, c = np.sin(PI * t), np.cos(PI * t)
    f0 = (k + t) * s
    f1 = s + PI * (k + t) * c
    f2 = 2 * PI * c - PI**2 * (k + t) * s
    f3 = -3 * PI**2 * s - PI**3 * (k + t) * c
    return f0, f1, f2, f3


def _a(x: np.ndarray) -> tuple[np.ndarray, ...]:
    return _factor(x, 1.0)


def _b(y: np.ndarray) -> tuple[np.ndarray, ...]:
    return _factor(y, 2.0)


def velocity(x: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    a0, a1, _, _ = _a(x)
    b0, b1, _, _ = _b(y)
    return C * a0 * b1, -C * a1 * b0


def pressure(x: np.ndarray, y: np.ndarray) -> np.ndarray:
    return 0.5 * np.cos(PI * x) * np.sin(PI * y)


def source_u(x: np.ndarray, y: np.ndarray, nu: float) -> np.ndarray:
    a0, a1, a2, _ = _a(x)
    b0, b1, b2, b3 = _b(y)
    u, v = C * a0 * b1, -C * a1 * b0
    ux, uy = C * a1 * b1, C * a0 * b2
    lap = C * (a2 * b1 + a0 * b3)
    px = -0.5 * PI * np.sin(PI * x) * np.sin(PI * y)
    return u * ux + v * uy + px - nu * lap


def source_v(x: np.ndarray, y: np.ndarray, nu: float) -> np.ndarray:
    a0, a1, a2, a3 = _a(x)
    b0, b1, b2, _ = _b(y)
    u, v = C * a0 * b1, -C * a1 * b0
    vx, vy = -C * a2 * b0, -C * a1 * b1
    lap = -C * (a3 * b0 + a1 * b2)
    py = 0.5 * PI * np.cos(PI * x) * np.cos(PI * y)
    return u * vx + v * vy + py - nu * lap
