"""Newton's method on the coupled (u, v, p) system, with chord steps and mesh sequencing.

Iterative residuals (the history): at every iteration, for the current iterate,

    mass_imbalance = sum over cells |net volume flux out of the cell|        / (U H)
    xmom_imbalance = sum over u volumes |net x-momentum imbalance|           / (U^2 H)
    ymom_imbalance = sum over v volumes |net y-momentum imbalance|           / (U^2 H)

with U the reference speed and H the domain height (the section the reference flow crosses),
so each is an imbalance relative to the flux of the reference flow through the domain; boundary
rows (fixed values) are left out. ``newton_update`` is max |change| of u, v (over U) and p
(over U^2) in the step that produced the iterate. The run stops as converged when all three
imbalances (and the update, if ``update_tolerance`` > 0) are at or below the tolerances.

Chord steps: once an iteration cuts the largest imbalance by more than 20x, the next step
reuses the last LU factorisation (a chord / simplified-Newton step, Kelley, "Solving Nonlinear
Equations with Newton's Method", SIAM 2003, ch. 5); a chord step that cuts it by less than 1/0.3 triggers a fresh factorisation.

Each full step is one sparse LU of the Jacobian by the backend the case file picks
(``linear/``: MUMPS where the system has it, SuperLU otherwise). The backend gets a hint order
sorted by position (rows of the mesh, u, v, p of a cell together), which SuperLU factorises in.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field
from types import ModuleType
from typing import Callable

import numpy as np
from . import linear
from .discretise import Discrete
from .errors import LinearSolverError
from .grid import Grid

COLUMNS = ("iteration", "mass_imbalance", "xmom_imbalance", "ymom_imbalance", "newton_update",
           "factorised", "seconds")

FAST = 0.05  # an iteration this much faster than the last lets the next one reuse the LU
SLOW = 0.3  # a chord step slower than this asks for a fresh LU (an LU costs some 20-50 solves)


@dataclass
class Outcome:
    x: np.ndarray
    status: str  # converged | not_converged | diverged | singular
    history: list[tuple] = field(default_factory=list)
    factorisations: int = 0
    linear_seconds: float = 0.0
    message: str = ""
    monitors: list[dict[str, float]] = field(default_factory=list)  # one per history row, if watched

    @property
    def iterations(self) -> int:
        return len(self.history) - 1


def norms(d: Discrete, r: np.ndarray, u_ref: float, h_ref: float) -> tuple[float, float, float]:
    return (float(np.abs(r[d.mass_rows]).sum() / (u_ref * h_ref)),
            float(np.abs(r[d.xmom_rows]).sum() / (u_ref**2 * h_ref)),
            float(np.abs(r[d.ymom_rows]).sum() / (u_ref**2 * h_ref)))


def position_order(nx: int, ny: int) -> np.ndarray:
    """Permutation of the unknowns sorting them by (row, column) position on the staggered mesh."""
    iu_x, iu_y = np.meshgrid(2 * np.arange(nx + 1), 2 * np.arange(ny) + 1, indexing="ij")
    iv_x, iv_y = np.meshgrid(2 * np.arange(nx) + 1, 2 * np.arange(ny + 1), indexing="ij")
    ip_x, ip_y = np.meshgrid(2 * np.arange(nx) + 1, 2 * np.arange(ny) + 1, indexing="ij")
    px = np.concatenate([iu_x.ravel(), iv_x.ravel(), ip_x.ravel()])
    py = np.concatenate([iu_y.ravel(), iv_y.ravel(), ip_y.ravel()])
    return np.lexsort((px, py))


def newton(d: Discrete, x0: np.ndarray, *, tolerance: float, max_iterations: int, update_tolerance: float = 0.0,
           chord: bool = True, divergence_limit: float = 1e6, u_ref: float = 1.0, h_ref: float = 1.0,
           log: Callable[[str], None] = print, label: str = "", backend: ModuleType = linear.superlu,
           watch: Callable[[np.ndarray], dict[str, float]] | None = None) -> Outcome:
    """Solve R(x) = 0 from x0; every iterate's imbalances go to ``history`` and ``log``.

    ``backend`` is a module of ``linear`` (its ``Factoriser`` makes the LU of each full step);
    ``watch``, if given, maps every iterate to the values recorded in ``monitors``.
    """
    lay = d.layout
    n_vel = lay.n - lay.nx * lay.ny
    scale = np.concatenate([np.full(n_vel, 1.0 / u_ref), np.full(lay.nx * lay.ny, 1.0 / u_ref**2)])
    x = x0.copy()
    lu = backend.Factoriser(position_order(lay.nx, lay.ny))
    try:
        return _iterate(d, x, lu, scale, tolerance=tolerance, max_iterations=max_iterations,
                        update_tolerance=update_tolerance, chord=chord, divergence_limit=divergence_limit,
                        u_ref=u_ref, h_ref=h_ref, log=log, label=label, watch=watch)
    finally:
        lu.close()


def _iterate(d: Discrete, x: np.ndarray, lu, scale: np.ndarray, *, tolerance: float, max_iterations: int,
             update_tolerance: float, chord: bool, divergence_limit: float, u_ref: float, h_ref: float,
             log: Callable[[str], None], label: str,
             watch: Callable[[np.ndarray], dict[str, float]] | None) -> Outcome:
    sys_ = d.system
    out = Outcome(x, "not_converged")
    factored = False
    reuse = False
    prev = None
    update = float("nan")
    fresh = False
    t0 = time.perf_counter()
    first = None
    for it in range(max_iterations + 1):
        r = sys_.residual(x)
        m = norms(d, r, u_ref, h_ref)
        out.history.append((it, *m, update, int(fresh), time.perf_counter() - t0))
        if watch is not None:
            out.monitors.append(watch(x))
        log(f"{label}iter {it:3d}  mass {m[0]:.3e}  x-mom {m[1]:.3e}  y-mom {m[2]:.3e}  "
            f"update {update:.3e}{'  (new LU)' if fresh else ''}")
        worst = max(m)
        if first is None:
            first = max(worst, 1e-300)
        if not np.all(np.isfinite(m)) or not np.all(np.isfinite(x)):
            out.status, out.message = "diverged", f"non-finite values at iteration {it}"
            break
        if worst > divergence_limit * max(first, 1.0):
            out.status = "diverged"
            out.message = f"imbalance {worst:.3e} at iteration {it} exceeds {divergence_limit:g} x its start"
            break
        ok_update = update_tolerance <= 0 or (np.isfinite(update) and update <= update_tolerance)
        if worst <= tolerance and ok_update:
            out.status = "converged"
            break
        if it == max_iterations:
            out.status = "not_converged"
            out.message = f"iteration limit {max_iterations} reached with largest imbalance {worst:.3e}"
            break
        if prev is not None:
            ratio = worst / max(prev, 1e-300)
            reuse = chord and factored and (ratio < FAST if fresh else ratio < SLOW)
        fresh = not reuse
        t1 = time.perf_counter()
        try:
            if fresh:
                lu.factor(sys_.jacobian(x))
                factored = True
                out.factorisations += 1
            dx = lu.solve(-r)
        except LinearSolverError as exc:
            out.status, out.message = "singular", f"sparse LU failed at iteration {it}: {exc}"
            break
        out.linear_seconds += time.perf_counter() - t1
        update = float(np.max(np.abs(dx) * scale))
        x = x + dx
        prev = worst
    out.x = x
    return out


def _weights(a: np.ndarray, b: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Left index into ``a`` and linear weight for each point of ``b`` (extrapolating past the ends)."""
    k = np.clip(np.searchsorted(a, b) - 1, 0, len(a) - 2)
    return k, (b - a[k]) / (a[k + 1] - a[k])


def _bilinear(ax: np.ndarray, ay: np.ndarray, f: np.ndarray, bx: np.ndarray, by: np.ndarray) -> np.ndarray:
    """Bilinear interpolation of f(ax, ay) on a tensor mesh to the tensor points (bx, by)."""
    i, tx = _weights(ax, bx)
    j, ty = _weights(ay, by)
    fx = (1 - tx)[:, None] * f[i] + tx[:, None] * f[i + 1]
    return (1 - ty)[None, :] * fx[:, j] + ty[None, :] * fx[:, j + 1]


def interpolate(coarse: Grid, xc: tuple[np.ndarray, np.ndarray, np.ndarray], fine: Grid) -> tuple[np.ndarray, ...]:
    """Coarse-mesh u, v, p onto a finer mesh (bilinear on each staggered set, linear beyond the ends)."""
    return (_bilinear(coarse.xf, coarse.yc, xc[0], fine.xf, fine.yc),
            _bilinear(coarse.xc, coarse.yf, xc[1], fine.xc, fine.yf),
            _bilinear(coarse.xc, coarse.yc, xc[2], fine.xc, fine.yc))
