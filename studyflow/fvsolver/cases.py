"""The case kinds (plate, cavity, channel, mms, step): mesh, boundary conditions, viscosity,
sources and starting field.

Lengths are scaled by the reference length (plate length, cavity side, channel height, square
side) and velocities by the reference speed (free stream, lid, mean inflow), so nu = 1/Re.

Flat plate (zero pressure gradient), the defaults and why. Domain x in [-upstream, 1 + buffer],
y in [0, height]; the plate is the wall from x = 0 on; the bottom ahead of it is a symmetry
line. The inlet holds the total pressure p + |u|^2/2 = 1/2 instead of the velocity, and the
top and the outlet are open at p = 0, so the displacement of the boundary layer pushes fluid
out through the top rather than accelerating the outer flow. The wall continues past x = 1 as
a buffer so the outlet and a trailing-edge singularity stay away from the measured part. A
fixed-velocity inlet close to the leading edge under a low top boundary (``inlet = "velocity"``,
``top = "slip"``) instead keeps the drag several per cent high on every mesh (+5 % with the inlet
0.25 L ahead and the top 1 L up): blockage and the inlet's interaction with the leading-edge
singularity are domain errors, not mesh errors.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from typing import Callable

import numpy as np

from . import manufactured
from .boundary import Boundaries, Exact, Inflow, Open, Segment, Slip, TotalPressure, Wall
from .config import CaseConfig
from .grid import Grid, a_for_first_fraction, clustered, exp_nodes, first_fraction, join, stretch_to_a

Start = Callable[[Grid], tuple[np.ndarray, np.ndarray, np.ndarray]]


@dataclass(frozen=True)
class Problem:
    kind: str
    config: CaseConfig
    grid: Grid
    bounds: Boundaries
    nu: float
    h_ref: float  # length across the flow used to normalise the residuals
    start: Start
    source_u: Callable | None = None
    source_v: Callable | None = None
    pin_level: float = 0.0


def _uniform(u: float) -> Start:
    def start(g: Grid):
        return (np.full((g.nx + 1, g.ny), u), np.zeros((g.nx, g.ny + 1)), np.zeros((g.nx, g.ny)))
    return start


def plate_counts(nx: int) -> tuple[int, int, int]:
    """Cells upstream, along the plate and in the buffer: 1/4, 5/8, 1/8 of nx."""
    n_up = max(2, round(nx / 4))
    n_buf = max(2, round(nx / 8))
    return n_up, nx - n_up - n_buf, n_buf


def plate_grid(cfg: CaseConfig) -> Grid:
    up, height, buf = cfg.domain["upstream"], cfg.domain["height"], cfg.domain["buffer"]
    n_up, n_pl, n_buf = plate_counts(cfg.nx)
    a = stretch_to_a(cfg.stretch_x)
    plate = exp_nodes(1.0, n_pl, a)
    # Upstream and buffer maps are chosen so their first cells match the plate's end cells in
    # the limit of many cells; the map parameters do not depend on nx, so meshes stay nested.
    a_up = a_for_first_fraction(first_fraction(a) / n_pl * n_up / up)
    a_buf = a_for_first_fraction(first_fraction(-a) / n_pl * n_buf / buf)
    upstream = -exp_nodes(up, n_up, a_up)[::-1]
    buffer = 1.0 + exp_nodes(buf, n_buf, a_buf)
    xf = join(upstream, plate, buffer)
    yf = clustered(0.0, height, cfg.ny, cfg.stretch_y, "low")
    return Grid(xf, yf)


def build(cfg: CaseConfig) -> Problem:
    nu = 1.0 / cfg.reynolds
    if cfg.kind == "plate":
        g = plate_grid(cfg)
        x0, x1 = float(g.xf[0]), float(g.xf[-1])
        # the alternatives exist to show what the defaults avoid (tests/fvsolver/test_fv_blasius.py)
        inlet = TotalPressure(0.5) if cfg.extra["inlet"] == "total_pressure" else Inflow(1.0, 0.0)
        top = Open(0.0) if cfg.extra["top"] == "open" else Slip()
        b = Boundaries(west=[Segment(0.0, g.yf[-1], inlet)],
                       east=[Segment(0.0, g.yf[-1], Open(0.0))],
                       south=[Segment(x0, 0.0, Slip()), Segment(0.0, x1, Wall())],
                       north=[Segment(x0, x1, top)])
        return Problem("plate", cfg, g, b, nu, float(g.yf[-1]), _uniform(1.0))
    if cfg.kind == "cavity":
        g = Grid(clustered(0.0, 1.0, cfg.nx, cfg.stretch_x, "both"), clustered(0.0, 1.0, cfg.ny, cfg.stretch_y, "both"))
        b = Boundaries(west=[Segment(0, 1, Wall())], east=[Segment(0, 1, Wall())],
                       south=[Segment(0, 1, Wall())], north=[Segment(0, 1, Wall(1.0))])
        return Problem("cavity", cfg, g, b, nu, 1.0, _uniform(0.0))
    if cfg.kind == "channel":
        length = cfg.domain["length"]
        g = Grid(clustered(0.0, length, cfg.nx, cfg.stretch_x, "low"), clustered(0.0, 1.0, cfg.ny, cfg.stretch_y, "both"))
        b = Boundaries(west=[Segment(0, 1, Inflow(1.0, 0.0))], east=[Segment(0, 1, Open(0.0))],
                       south=[Segment(0, length, Wall())], north=[Segment(0, length, Wall())])
        return Problem("channel", cfg, g, b, nu, 1.0, _uniform(1.0))
    if cfg.kind == "step":
        # backward-facing step, expansion ratio 2 (the layout of Gartling, Int. J. Numer. Meth.
        # Fluids 11, 1990, shifted to y in [0, 1]): parabolic inflow of mean speed 1 over the upper
        # half of the west side, the step face below it, walls at y = 0 and 1, open outlet
        length = cfg.domain["length"]
        g = Grid(clustered(0.0, length, cfg.nx, cfg.stretch_x, "low"), clustered(0.0, 1.0, cfg.ny, cfg.stretch_y, "both"))

        def inlet(x, y):
            s = np.clip(y - 0.5, 0.0, 0.5)
            return 24.0 * s * (0.5 - s), 0.0 * s

        b = Boundaries(west=[Segment(0.0, 0.5, Wall()), Segment(0.5, 1.0, Exact(inlet))],
                       east=[Segment(0, 1, Open(0.0))],
                       south=[Segment(0, length, Wall())], north=[Segment(0, length, Wall())])

        def start(gr: Grid):
            u = np.where(gr.yc[None, :] > 0.5, 1.0, 0.0) * np.ones((gr.nx + 1, 1))
            u[1:] = 0.5  # the same mass flux, spread over the full height downstream
            return u, np.zeros((gr.nx, gr.ny + 1)), np.zeros((gr.nx, gr.ny))

        return Problem("step", cfg, g, b, nu, 1.0, start)
    if cfg.kind == "mms":
        g = Grid(clustered(0.0, 1.0, cfg.nx, cfg.stretch_x, "both"), clustered(0.0, 1.0, cfg.ny, cfg.stretch_y, "both"))
        e = [Segment(0, 1, Exact(manufactured.velocity))]
        return Problem("mms", cfg, g, Boundaries(e, e, e, e), nu, 1.0, _uniform(0.0),
                       lambda x, y: manufactured.source_u(x, y, nu), lambda x, y: manufactured.source_v(x, y, nu),
                       float(manufactured.pressure(g.xc[0], g.yc[0])))
    raise ValueError(cfg.kind)


def coarser(cfg: CaseConfig) -> CaseConfig | None:
    """The same case on the mesh with half the cells each way, if that mesh is still sensible."""
    if cfg.nx % 2 or cfg.ny % 2 or cfg.nx < 16 or cfg.ny < 8:
        return None
    nx, ny = cfg.nx // 2, cfg.ny // 2
    if cfg.kind in ("cavity", "mms") and (nx % 2 or ny % 2):
        return None
    if cfg.kind in ("channel", "step") and ny % 2:
        return None
    return dataclasses.replace(cfg, nx=nx, ny=ny)


def auto_levels(cfg: CaseConfig) -> int:
    """Coarser meshes to solve first: halve while the coarser mesh keeps at least 512 cells."""
    levels, c = 0, cfg
    while True:
        nxt = coarser(c)
        if nxt is None or nxt.nx * nxt.ny < 512:
            return levels
        levels, c = levels + 1, nxt
