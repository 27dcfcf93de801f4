"""Derived quantities of a converged field, per case kind (all in reference units).

Wall shear is the shear stress at the wall per unit density in the mesh's axes: nu du/dy on
the south and north sides, nu dv/dx on the west and east sides. So a flow along +x that is
attached has tau > 0 on a south wall and tau < 0 on a north wall, and a sign change marks a
separation or a reattachment. The normal derivative is the one-sided second-order gradient
through the wall value and the first two interior nodes: for u(0) = 0 (or the wall speed g)
and nodes at distances d0, d1 from the wall,

    du/dn|_wall = [(u0 - g) d1^2 - (u1 - g) d0^2] / (d0 d1 (d1 - d0))      (quadratic fit),

with n pointing into the fluid, so du/dy = -du/dn on a north wall.

Skin-friction coefficient Cf = tau_w / (U^2 / 2); drag coefficient C_D = (1/L) int_0^L Cf dx,
summed over the wall share of each u control volume inside [0, L].
Boundary-layer thicknesses at a station integrate, with the trapezoidal rule, from the wall to
the height of eta = y sqrt(U/(nu x)) = 10 (well outside the layer; U_e is u there):
delta* = int (1 - u/U_e) dy, theta = int u/U_e (1 - u/U_e) dy, H = delta*/theta.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from . import manufactured
from .boundary import Wall
from .cases import Problem, plate_counts
from .grid import Grid

ETA_EDGE = 10.0


def wall_gradient(u0: np.ndarray, u1: np.ndarray, d0: float, d1: float, g: float = 0.0) -> np.ndarray:
    """Second-order one-sided normal derivative at a wall (docstring of the module)."""
    return ((u0 - g) * d1**2 - (u1 - g) * d0**2) / (d0 * d1 * (d1 - d0))


def wall_shear(prob: Problem, u: np.ndarray, v: np.ndarray) -> dict[str, dict[str, np.ndarray]]:
    """Shear on every side that is a wall: coordinates along the side (cell edges) and tau."""
    g = prob.grid
    nu = prob.nu
    out: dict[str, dict[str, np.ndarray]] = {}
    def walls(segments, at):
        mask = np.zeros(len(at), dtype=bool)
        slide = np.zeros(len(at))
        for s in segments:
            if isinstance(s.condition, Wall):
                hit = (at >= s.start) & (at <= s.end)
                mask |= hit
                slide[hit] = s.condition.slide
        return mask, slide

    uc = 0.5 * (u[1:] + u[:-1])  # u at cell centres (nx, ny)
    vc = 0.5 * (v[:, 1:] + v[:, :-1])
    yc, xc, yf, xf = g.yc, g.xc, g.yf, g.xf
    for side in ("south", "north", "west", "east"):
        segs = getattr(prob.bounds, side)
        if side in ("south", "north"):
            mask, slide = walls(segs, xc)
            if side == "south":
                tau = nu * wall_gradient(uc[:, 0], uc[:, 1], yc[0] - yf[0], yc[1] - yf[0], slide)
            else:
                tau = -nu * wall_gradient(uc[:, -1], uc[:, -2], yf[-1] - yc[-1], yf[-1] - yc[-2], slide)
            at = xc
        else:
            mask, slide = walls(segs, yc)
            if side == "west":
                tau = nu * wall_gradient(vc[0], vc[1], xc[0] - xf[0], xc[1] - xf[0], slide)
            else:
                tau = -nu * wall_gradient(vc[-1], vc[-2], xf[-1] - xc[-1], xf[-1] - xc[-2], slide)
            at = yc
        if mask.any():
            out[side] = {"s": at[mask], "tau": tau[mask], "index": np.nonzero(mask)[0]}
    return out


def _profile_at(g: Grid, u: np.ndarray, x: float) -> np.ndarray:
    """u(y) at cell-centre heights on the vertical line x (linear between u faces)."""
    i = int(np.clip(np.searchsorted(g.xf, x) - 1, 0, g.nx - 1))
    t = (x - g.xf[i]) / (g.xf[i + 1] - g.xf[i])
    return (1 - t) * u[i] + t * u[i + 1]


def plate(prob: Problem, u: np.ndarray, v: np.ndarray, p: np.ndarray) -> dict[str, Any]:
    g, nu = prob.grid, prob.nu
    yc = g.yc
    on = (g.xf >= 0.0)
    i_w = np.nonzero(on)[0]
    i_w = i_w[i_w < g.nx]  # the outlet face has no control volume of its own on the wall
    tau = nu * wall_gradient(u[i_w, 0], u[i_w, 1], yc[0], yc[1])
    cf = 2.0 * tau
    xs = g.xf[i_w]
    xe = np.concatenate([[g.xf[0]], g.xc, [g.xf[-1]]])
    lo, hi = xe[i_w], xe[i_w + 1]
    share = np.clip(np.minimum(hi, 1.0) - np.maximum(lo, 0.0), 0.0, None)
    cd = float(np.sum(cf * share))
    keep = (xs > 0.0) & (xs <= 1.0 + 1e-12)
    stations = []
    for xs_ in prob.config.extra["stations"]:
        prof = _profile_at(g, u, xs_)
        y_e = ETA_EDGE * np.sqrt(nu * xs_)
        y = np.concatenate([[0.0], yc[yc < y_e], [y_e]])
        ue = float(np.interp(y_e, yc, prof))
        r = np.concatenate([[0.0], prof[yc < y_e], [ue]]) / ue
        dstar = float(np.trapezoid(1 - r, y))
        theta = float(np.trapezoid(r * (1 - r), y))
        stations.append({"x": xs_, "re_x": xs_ * prob.config.reynolds, "cf": float(np.interp(xs_, xs, cf)),
                         "delta_star": dstar, "theta": theta, "shape_factor": dstar / theta, "u_edge": ue})
    profiles = []
    for xs_ in prob.config.extra["profile_stations"]:
        prof = _profile_at(g, u, xs_)
        profiles.append({"x": xs_, "y": [0.0] + yc.tolist(), "u": [0.0] + prof.tolist(),
                         "eta": (np.concatenate([[0.0], yc]) / np.sqrt(nu * xs_)).tolist()})
    return {
        "drag": {"cd": cd, "reynolds": prob.config.reynolds},
        "cf": {"x": xs[keep].tolist(), "values": cf[keep].tolist()},
        "stations": {k: [s[k] for s in stations] for k in stations[0]},
        "profiles": profiles,
        "mesh_split": dict(zip(("upstream", "plate", "buffer"), plate_counts(g.nx))),
    }


def _vortex(g: Grid, u: np.ndarray) -> dict[str, float]:
    """Minimum of the stream function psi (psi = 0 on the walls, u = dpsi/dy) and where it is."""
    psi = np.zeros((g.nx + 1, g.ny + 1))
    psi[:, 1:] = np.cumsum(u * g.dy[None, :], axis=1)
    inner = psi[1:-1, 1:-1]
    i, j = np.unravel_index(np.argmin(inner), inner.shape)
    i, j = i + 1, j + 1

    # quadratic surface through the 3x3 nodes around the minimum node; its stationary point
    X, Y = np.meshgrid(g.xf[i - 1:i + 2] - g.xf[i], g.yf[j - 1:j + 2] - g.yf[j], indexing="ij")
    X, Y, F = X.ravel(), Y.ravel(), psi[i - 1:i + 2, j - 1:j + 2].ravel()
    M = np.stack([np.ones_like(X), X, Y, X * X, X * Y, Y * Y], axis=1)
    c = np.linalg.lstsq(M, F, rcond=None)[0]
    H = np.array([[2 * c[3], c[4]], [c[4], 2 * c[5]]])
    try:
        dx, dy = np.linalg.solve(H, -c[1:3])
    except np.linalg.LinAlgError:
        dx = dy = 0.0
    if abs(dx) > (g.xf[i + 1] - g.xf[i - 1]) or abs(dy) > (g.yf[j + 1] - g.yf[j - 1]):
        dx = dy = 0.0  # a fit this far off is noise: keep the node
    val = c[0] + c[1] * dx + c[2] * dy + c[3] * dx * dx + c[4] * dx * dy + c[5] * dy * dy
    return {"x": float(g.xf[i] + dx), "y": float(g.yf[j] + dy), "psi": float(val), "psi_node": float(psi[i, j])}


def cavity(prob: Problem, u: np.ndarray, v: np.ndarray, p: np.ndarray) -> dict[str, Any]:
    g = prob.grid
    uc = _profile_at(g, u, 0.5)
    j = int(np.clip(np.searchsorted(g.yf, 0.5) - 1, 0, g.ny - 1))
    t = (0.5 - g.yf[j]) / (g.yf[j + 1] - g.yf[j])
    vc = (1 - t) * v[:, j] + t * v[:, j + 1]
    vort = _vortex(g, u)
    return {
        "centreline_u": {"y": [0.0] + g.yc.tolist() + [1.0], "u": [0.0] + uc.tolist() + [1.0]},
        "centreline_v": {"x": [0.0] + g.xc.tolist() + [1.0], "v": [0.0] + vc.tolist() + [0.0]},
        "vortex": {"x": vort["x"], "y": vort["y"], "psi_min": vort["psi"]},
        "u_min": float(uc.min()), "v_min": float(vc.min()), "v_max": float(vc.max()),
    }


def channel(prob: Problem, u: np.ndarray, v: np.ndarray, p: np.ndarray) -> dict[str, Any]:
    g, cfg = prob.grid, prob.config
    length = cfg.domain["length"]
    # centreline velocity on every u face (y = 1/2 is a face line: mean of the two cells beside it)
    jc = g.ny // 2
    u_cl = 0.5 * (u[:, jc - 1] + u[:, jc])
    x_dev = cfg.extra["gradient_to"] * length
    u_dev = float(np.interp(x_dev, g.xf, u_cl))
    reach = np.nonzero(u_cl >= 0.99 * u_dev)[0]
    dev_len = float(np.interp(0.99 * u_dev, u_cl[: reach[0] + 1], g.xf[: reach[0] + 1])) if len(reach) else float("nan")
    pm = np.sum(p * g.dy[None, :], axis=1) / np.sum(g.dy)  # section-averaged pressure
    sel = (g.xc >= cfg.extra["gradient_from"] * length) & (g.xc <= cfg.extra["gradient_to"] * length)
    slope = float(np.polyfit(g.xc[sel], pm[sel], 1)[0]) if sel.sum() >= 2 else float("nan")
    xs = cfg.extra["profile_station"] * length
    prof = _profile_at(g, u, xs)
    return {
        "pressure_gradient": slope,
        "centreline_velocity": u_dev,
        "development_length": dev_len,
        "centreline": {"x": g.xf.tolist(), "u": u_cl.tolist()},
        "profile": {"x": xs, "y": [0.0] + g.yc.tolist() + [1.0], "u": [0.0] + prof.tolist() + [0.0]},
        "reynolds": cfg.reynolds,
    }


def mms(prob: Problem, u: np.ndarray, v: np.ndarray, p: np.ndarray) -> dict[str, Any]:
    g = prob.grid
    out = {}
    X, Y = np.meshgrid(g.xf, g.yc, indexing="ij")
    wu = np.outer(np.diff(np.concatenate([[g.xf[0]], g.xc, [g.xf[-1]]])), g.dy)
    eu = u - manufactured.velocity(X, Y)[0]
    X, Y = np.meshgrid(g.xc, g.yf, indexing="ij")
    wv = np.outer(g.dx, np.diff(np.concatenate([[g.yf[0]], g.yc, [g.yf[-1]]])))
    ev = v - manufactured.velocity(X, Y)[1]
    X, Y = np.meshgrid(g.xc, g.yc, indexing="ij")
    wp = np.outer(g.dx, g.dy)
    ep = p - manufactured.pressure(X, Y)
    ep = ep - np.sum(ep * wp) / np.sum(wp)  # the pressure level is arbitrary
    for name, e, w in (("u", eu, wu), ("v", ev, wv), ("p", ep, wp)):
        out[name] = {"l2": float(np.sqrt(np.sum(e**2 * w) / np.sum(w))), "linf": float(np.abs(e).max())}
    return {"errors": out, "solution": "psi = 0.1 (1+x) sin(pi x) (2+y) sin(pi y); p = 0.5 cos(pi x) sin(pi y)"}


def _sign_changes(x: np.ndarray, tau: np.ndarray) -> list[tuple[float, int]]:
    """Positions where tau changes sign (linear interpolation) and the direction (+1 up, -1 down)."""
    out = []
    for k in np.nonzero(np.sign(tau[:-1]) * np.sign(tau[1:]) < 0)[0]:
        xz = x[k] - tau[k] * (x[k + 1] - x[k]) / (tau[k + 1] - tau[k])
        out.append((float(xz), 1 if tau[k + 1] > tau[k] else -1))
    return out


def step(prob: Problem, u: np.ndarray, v: np.ndarray, p: np.ndarray) -> dict[str, Any]:
    """Backward-facing step: where the separated flow behind the step reattaches on the lower wall
    (nu du/dy back to positive), and the bubble on the upper wall, if there is one: there
    attached flow has nu du/dy < 0, so separation is the first change to positive and
    reattachment the next change back."""
    shear = wall_shear(prob, u, v)
    lo, hi = shear["south"], shear["north"]
    down = _sign_changes(lo["s"], lo["tau"])
    reattach = next((x for x, d in down if d > 0), float("nan"))
    # the first cells behind the step may hold a tiny corner eddy: the main bubble ends at the
    # last upward crossing before the shear stays positive
    ups = [x for x, d in down if d > 0]
    if ups:
        reattach = ups[-1] if lo["tau"][-1] > 0 else ups[0]
    top = _sign_changes(hi["s"], hi["tau"])
    sep = next((x for x, d in top if d > 0), float("nan"))
    att = next((x for x, d in top if d < 0 and x > sep), float("nan")) if np.isfinite(sep) else float("nan")
    return {
        "reattachment_length": reattach,
        "upper_separation": sep,
        "upper_reattachment": att,
        "lower_wall_shear": {"x": lo["s"].tolist(), "tau": lo["tau"].tolist()},
        "upper_wall_shear": {"x": hi["s"].tolist(), "tau": hi["tau"].tolist()},
        "reynolds": prob.config.reynolds,
    }


KIND = {"plate": plate, "cavity": cavity, "channel": channel, "mms": mms, "step": step}

# The scalar metrics of each kind that ``monitors.csv`` follows iteration by iteration (key paths
# into the metrics dict): the history from which an iterative-error estimate of each is made.
MONITORS = {
    "plate": ("drag.cd",),
    "cavity": ("vortex.psi_min", "vortex.x", "vortex.y", "u_min", "v_min", "v_max"),
    "channel": ("pressure_gradient", "centreline_velocity", "development_length"),
    "mms": ("errors.u.l2", "errors.v.l2", "errors.p.l2"),
    "step": ("reattachment_length", "upper_separation", "upper_reattachment"),
}


def _at(data: dict, path: str) -> Any:
    for part in path.split("."):
        data = data[part]
    return data


def monitored(prob: Problem, u: np.ndarray, v: np.ndarray, p: np.ndarray) -> dict[str, float]:
    """The kind's ``MONITORS`` values for one iterate; NaN where an unconverged field has none."""
    keys = MONITORS[prob.config.kind]
    try:
        with np.errstate(all="ignore"):
            found = KIND[prob.config.kind](prob, u, v, p)
        return {k: float(_at(found, k)) for k in keys}
    except (ArithmeticError, ValueError, IndexError, KeyError, np.linalg.LinAlgError):
        # an early iterate can be far from any flow (no boundary-layer edge, no vortex): the
        # history records that as missing rather than stopping the run
        return {k: float("nan") for k in keys}
