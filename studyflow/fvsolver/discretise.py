"""Finite-volume discretisation of the steady incompressible Navier-Stokes equations on a MAC mesh.

    div(u u) + grad p - nu lap u = s,    div u = 0

Unknowns: u on vertical faces, v on horizontal faces, p at cell centres (Harlow & Welch,
Phys. Fluids 8, 1965). Each velocity component has its own control volume centred on its face.
Convection is second-order central: the mass flux through a control-volume face is the sum of
the fluxes of the two half cell faces it spans (so momentum volumes conserve mass exactly when
the cells do), and the transported value is the linear interpolation of the two neighbouring
values. Diffusion uses the two-point gradient across each face. At a boundary the face value
and gradient come from the tangential condition (Dirichlet: value g, gradient (u0 - g)/d with d
the distance to the first node; free: value u0, gradient 0).

The u and v equations are the same code: the v equation is the u equation of the transposed
mesh (``Frame``).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

from .algebra import Assembly, Lin, QuadraticSystem, raw
from .boundary import FIXED, OPEN, TOTAL, Boundaries, NormalSpec, TangentSpec, normal_spec, tangent_spec
from .grid import Grid

SourceFn = Callable[[np.ndarray, np.ndarray], np.ndarray]


@dataclass(frozen=True)
class Layout:
    """Global numbering of the unknowns: u, then v, then p, each in C order."""

    nx: int
    ny: int

    @property
    def iu(self) -> np.ndarray:
        return np.arange((self.nx + 1) * self.ny).reshape(self.nx + 1, self.ny)

    @property
    def iv(self) -> np.ndarray:
        return (self.nx + 1) * self.ny + np.arange(self.nx * (self.ny + 1)).reshape(self.nx, self.ny + 1)

    @property
    def ip(self) -> np.ndarray:
        off = (self.nx + 1) * self.ny + self.nx * (self.ny + 1)
        return off + np.arange(self.nx * self.ny).reshape(self.nx, self.ny)

    @property
    def n(self) -> int:
        return (self.nx + 1) * self.ny + self.nx * (self.ny + 1) + self.nx * self.ny

    def split(self, x: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        nu_, nv = (self.nx + 1) * self.ny, self.nx * (self.ny + 1)
        return (x[:nu_].reshape(self.nx + 1, self.ny), x[nu_:nu_ + nv].reshape(self.nx, self.ny + 1),
                x[nu_ + nv:].reshape(self.nx, self.ny))


@dataclass(frozen=True)
class Frame:
    """One momentum component seen along its own axis a (normal to its faces) and the other, b."""

    af: np.ndarray
    bf: np.ndarray
    n_idx: np.ndarray  # (na+1, nb) the component itself
    t_idx: np.ndarray  # (na, nb+1) the other component
    p_idx: np.ndarray  # (na, nb)
    lo_a: NormalSpec
    hi_a: NormalSpec
    lo_b: TangentSpec
    hi_b: TangentSpec
    source: SourceFn | None  # s(a, b) for this component


@dataclass(frozen=True)
class Discrete:
    """The assembled system and the row sets the residual norms are summed over."""

    system: QuadraticSystem
    layout: Layout
    mass_rows: np.ndarray
    xmom_rows: np.ndarray
    ymom_rows: np.ndarray


def _ext_centres(f: np.ndarray) -> np.ndarray:
    """Cell centres with one mirrored ghost cell at each end."""
    d = np.diff(f)
    return np.concatenate([[f[0] - 0.5 * d[0]], 0.5 * (f[1:] + f[:-1]), [f[-1] + 0.5 * d[-1]]])


def _ext_widths(f: np.ndarray) -> np.ndarray:
    d = np.diff(f)
    return np.concatenate([[d[0]], d, [d[-1]]])


def momentum(asm: Assembly, fr: Frame, nu: float) -> np.ndarray:
    """Add one momentum component's equations; return the rows that are momentum balances."""
    af, bf = fr.af, fr.bf
    na, nb = len(af) - 1, len(bf) - 1
    bc = 0.5 * (bf[1:] + bf[:-1])
    db = np.diff(bf)[None, :]
    ac_x = _ext_centres(af)
    da_x = _ext_widths(af)
    w = np.diff(ac_x)[:, None]  # control-volume widths along a, faces 0..na
    N = fr.n_idx
    # Zero-gradient ghosts beyond each a-end; they only matter where the end is OPEN.
    Nx = np.vstack([N[:1], N, N[-1:]])
    Tx = np.vstack([fr.t_idx[:1], fr.t_idx, fr.t_idx[-1:]])
    Px = np.vstack([np.full((1, nb), -1), fr.p_idx, np.full((1, nb), -1)])
    Pc = np.zeros(Px.shape)
    Pc[0] = np.where(fr.lo_a.kind == OPEN, fr.lo_a.value, 0.0)
    Pc[-1] = np.where(fr.hi_a.kind == OPEN, fr.hi_a.value, 0.0)

    def pick(idx, weight=1.0, const=0.0):
        return Lin.pick(idx, const, weight)

    # a-direction faces of the volume (at cell centres): value is the midpoint average.
    u_e = pick(Nx[1:na + 2], 0.5) + pick(Nx[2:na + 3], 0.5)
    u_w = pick(Nx[0:na + 1], 0.5) + pick(Nx[1:na + 2], 0.5)
    grad_e = pick(Nx[2:na + 3], 1.0 / da_x[1:na + 2, None]) - pick(Nx[1:na + 2], 1.0 / da_x[1:na + 2, None])
    grad_w = pick(Nx[1:na + 2], 1.0 / da_x[0:na + 1, None]) - pick(Nx[0:na + 1], 1.0 / da_x[0:na + 1, None])
    pres = (pick(Px[1:na + 2], db, Pc[1:na + 2]) - pick(Px[0:na + 1], db, Pc[0:na + 1]))

    # b-direction faces: mass flux = sum of the two half cell faces (conservative).
    half_lo = (0.5 * da_x[0:na + 1])[:, None]
    half_hi = (0.5 * da_x[1:na + 2])[:, None]
    f_n = pick(Tx[0:na + 1, 1:], half_lo) + pick(Tx[1:na + 2, 1:], half_hi)
    f_s = pick(Tx[0:na + 1, :-1], half_lo) + pick(Tx[1:na + 2, :-1], half_hi)

    shape = (na + 1, nb)
    # value and gradient on the north face (bf[j+1]); the last one is the boundary.
    j = np.arange(nb)
    jn = np.minimum(j + 1, nb - 1)
    interior_n = j < nb - 1
    dist_n = np.where(interior_n, bc[jn] - bc[j], bf[-1] - bc[-1])
    w_lo = np.where(interior_n, (bc[jn] - bf[j + 1]) / dist_n, 0.0)
    fr_hi, g_hi = fr.hi_b.frac[:, None], fr.hi_b.value[:, None]
    idx_hi = np.where(interior_n[None, :], N[:, jn], -1)
    val_n = raw(shape, [(N, np.where(interior_n, w_lo, 1.0 - fr_hi)),
                        (idx_hi, np.where(interior_n, 1.0 - w_lo, 0.0))],
                np.where(interior_n, 0.0, fr_hi * g_hi))
    grad_n = raw(shape, [(N, np.where(interior_n, -1.0, -fr_hi) / dist_n),
                         (idx_hi, np.where(interior_n, 1.0, 0.0) / dist_n)],
                 np.where(interior_n, 0.0, fr_hi * g_hi / dist_n))
    # south face (bf[j]); the first one is the boundary.
    js = np.maximum(j - 1, 0)
    interior_s = j > 0
    dist_s = np.where(interior_s, bc[j] - bc[js], bc[0] - bf[0])
    w_lo_s = np.where(interior_s, (bc[j] - bf[j]) / dist_s, 0.0)
    fr_lo, g_lo = fr.lo_b.frac[:, None], fr.lo_b.value[:, None]
    idx_lo = np.where(interior_s[None, :], N[:, js], -1)
    val_s = raw(shape, [(idx_lo, np.where(interior_s, w_lo_s, 0.0)),
                        (N, np.where(interior_s, 1.0 - w_lo_s, 1.0 - fr_lo))],
                np.where(interior_s, 0.0, fr_lo * g_lo))
    grad_s = raw(shape, [(N, np.where(interior_s, 1.0, fr_lo) / dist_s),
                         (idx_lo, np.where(interior_s, -1.0, 0.0) / dist_s)],
                 np.where(interior_s, 0.0, -fr_lo * g_lo / dist_s))

    mask = np.zeros(shape, dtype=bool)
    mask[1:na] = True
    mask[0] = fr.lo_a.kind == OPEN
    mask[na] = fr.hi_a.kind == OPEN
    rows = N[mask]

    diffusion = (grad_e * (nu * db) - grad_w * (nu * db) + grad_n * (nu * w) - grad_s * (nu * w))
    lin = pres - diffusion
    if fr.source is not None:
        a_at = af[:, None] * np.ones(shape)
        b_at = bc[None, :] * np.ones(shape)
        lin = lin - Lin.const_(fr.source(a_at, b_at) * w * db)
    asm.linear(rows, lin.flat(mask))
    asm.quadratic(rows, (u_e * db).flat(mask), u_e.flat(mask), +1.0)
    asm.quadratic(rows, (u_w * db).flat(mask), u_w.flat(mask), -1.0)
    asm.quadratic(rows, f_n.flat(mask), val_n.flat(mask), +1.0)
    asm.quadratic(rows, f_s.flat(mask), val_s.flat(mask), -1.0)

    # boundary faces of this component that are not momentum balances
    for end, spec, p_col in ((0, fr.lo_a, fr.p_idx[0]), (na, fr.hi_a, fr.p_idx[-1])):
        fixed = spec.kind == FIXED
        if fixed.any():
            asm.linear(N[end][fixed], Lin.pick(N[end][fixed]) - Lin.const_(spec.value[fixed]))
        total = spec.kind == TOTAL
        if total.any():
            # p + u^2/2 = p0 with the first cell's pressure standing for the face's: a half-cell
            # shift, harmless where the inflow is uniform (the plate's inlet is 1 L upstream)
            r = N[end][total]
            asm.linear(r, Lin.pick(p_col[total]) - Lin.const_(spec.value[total]))
            asm.quadratic(r, Lin.pick(r), Lin.pick(r, 0.0, 0.5), +1.0)
    return rows


def continuity(asm: Assembly, grid: Grid, lay: Layout, pin: tuple[int, float] | None) -> np.ndarray:
    """Net volume flux out of each cell; with ``pin`` one cell's row fixes the pressure level instead."""
    iu, iv, ip = lay.iu, lay.iv, lay.ip
    dx, dy = grid.dx[:, None], grid.dy[None, :]
    expr = ((Lin.pick(iu[1:], weight=dy) - Lin.pick(iu[:-1], weight=dy))
            + (Lin.pick(iv[:, 1:], weight=dx) - Lin.pick(iv[:, :-1], weight=dx)))
    rows = ip
    mask = np.ones(ip.shape, dtype=bool)
    if pin is not None:
        cell, level = pin
        mask.flat[cell] = False
        asm.linear(np.array([ip.flat[cell]]), Lin.pick(np.array([ip.flat[cell]])) - Lin.const_(np.array([level])))
    asm.linear(rows[mask], expr.flat(mask))
    return rows[mask]


def discretise(grid: Grid, bounds: Boundaries, nu: float, source_u: SourceFn | None = None,
               source_v: SourceFn | None = None, pin_level: float = 0.0) -> Discrete:
    """Assemble the residual of the whole problem on ``grid`` with the given boundaries."""
    lay = Layout(grid.nx, grid.ny)
    xf, yf, xc, yc = grid.xf, grid.yf, grid.xc, grid.yc
    xe, ye = _ext_centres(xf), _ext_centres(yf)
    # normal conditions
    west_n = normal_spec(bounds.west, yc, xf[0], side_is_x=False)
    east_n = normal_spec(bounds.east, yc, xf[-1], side_is_x=False)
    south_n = normal_spec(bounds.south, xc, yf[0], side_is_x=True)
    north_n = normal_spec(bounds.north, xc, yf[-1], side_is_x=True)
    # tangential conditions for u along south/north and for v along west/east
    south_t = tangent_spec(bounds.south, xf, xe[:-1], xe[1:], yf[0], side_is_x=True)
    north_t = tangent_spec(bounds.north, xf, xe[:-1], xe[1:], yf[-1], side_is_x=True)
    west_t = tangent_spec(bounds.west, yf, ye[:-1], ye[1:], xf[0], side_is_x=False)
    east_t = tangent_spec(bounds.east, yf, ye[:-1], ye[1:], xf[-1], side_is_x=False)

    asm = Assembly(lay.n)
    fu = Frame(xf, yf, lay.iu, lay.iv, lay.ip, west_n, east_n, south_t, north_t, source_u)
    sv = None if source_v is None else (lambda a, b: source_v(b, a))
    fv = Frame(yf, xf, lay.iv.T, lay.iu.T, lay.ip.T, south_n, north_n, west_t, east_t, sv)
    xrows = momentum(asm, fu, nu)
    yrows = momentum(asm, fv, nu)
    pin = (0, pin_level) if bounds.all_fixed() else None
    mrows = continuity(asm, grid, lay, pin)
    return Discrete(asm.finish(), lay, mrows, xrows, yrows)
