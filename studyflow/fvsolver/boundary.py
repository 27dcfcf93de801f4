"""Boundary conditions along the four sides of the rectangle, as segments.

A side is a list of ``Segment(start, end, condition)`` along its coordinate (x for the
south/north sides, y for the west/east sides). Each condition says two things:

- the normal velocity on the side's faces: a fixed value (``FIXED``), the total-pressure
  relation p + |u|^2/2 = p0 (``TOTAL``), or solved from momentum with a fixed static pressure
  outside (``OPEN``);
- the tangential velocity: fixed (a Dirichlet value) or free (zero normal gradient). A
  momentum control volume whose boundary face straddles two segments (the leading edge of a
  plate) gets the Dirichlet share of that face as ``frac``.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

FIXED, TOTAL, OPEN = 0, 1, 2

VelocityFn = Callable[[np.ndarray, np.ndarray], tuple[np.ndarray, np.ndarray]]


@dataclass(frozen=True)
class Wall:
    """No-slip wall; ``slide`` is its own speed along the side (+x or +y)."""

    slide: float = 0.0


@dataclass(frozen=True)
class Slip:
    """Symmetry line / frictionless wall: no normal velocity, no shear."""


@dataclass(frozen=True)
class Inflow:
    """Fixed velocity (u, v)."""

    u: float
    v: float


@dataclass(frozen=True)
class Exact:
    """Velocity taken from a function of (x, y): the manufactured solution."""

    velocity: VelocityFn


@dataclass(frozen=True)
class TotalPressure:
    """Inflow at total pressure p0: p + (u^2 + v^2)/2 = p0 with the tangential velocity zero."""

    p0: float


@dataclass(frozen=True)
class Open:
    """Outflow / far field: static pressure ``p`` outside, zero normal gradient of velocity."""

    p: float = 0.0


Condition = Wall | Slip | Inflow | Exact | TotalPressure | Open


@dataclass(frozen=True)
class Segment:
    start: float
    end: float
    condition: Condition


@dataclass(frozen=True)
class NormalSpec:
    """Per boundary face of the normal velocity: kind (FIXED/TOTAL/OPEN) and its value."""

    kind: np.ndarray
    value: np.ndarray


@dataclass(frozen=True)
class TangentSpec:
    """Per tangential momentum volume touching the side: Dirichlet share and value."""

    frac: np.ndarray
    value: np.ndarray


def _segment_at(segments: list[Segment], s: float, prefer_fixed: bool = False) -> Segment:
    hits = [g for g in segments if g.start <= s <= g.end]
    if not hits:
        return segments[0] if s < segments[0].start else segments[-1]
    if prefer_fixed:
        for g in hits:
            if _tangent_fixed(g.condition):
                return g
    return hits[-1] if len(hits) > 1 and s == hits[-1].start else hits[0]


def _tangent_fixed(cond: Condition) -> bool:
    return isinstance(cond, (Wall, Inflow, Exact, TotalPressure))


def _velocity(cond: Condition, x: float, y: float, side_is_x: bool) -> tuple[float, float]:
    """(u, v) the condition imposes at a point, where defined."""
    if isinstance(cond, Wall):
        return (cond.slide, 0.0) if side_is_x else (0.0, cond.slide)
    if isinstance(cond, Inflow):
        return cond.u, cond.v
    if isinstance(cond, Exact):
        u, v = cond.velocity(np.asarray(x), np.asarray(y))
        return float(u), float(v)
    return 0.0, 0.0


def normal_spec(segments: list[Segment], along: np.ndarray, fixed: float, side_is_x: bool) -> NormalSpec:
    """Normal-velocity condition at the side's face centres ``along`` (side coordinate)."""
    kind = np.zeros(len(along), dtype=int)
    value = np.zeros(len(along))
    for k, s in enumerate(along):
        cond = _segment_at(segments, float(s)).condition
        x, y = (s, fixed) if side_is_x else (fixed, s)
        if isinstance(cond, TotalPressure):
            kind[k], value[k] = TOTAL, cond.p0
        elif isinstance(cond, Open):
            kind[k], value[k] = OPEN, cond.p
        else:
            u, v = _velocity(cond, x, y, side_is_x)
            kind[k], value[k] = FIXED, (v if side_is_x else u)
    return NormalSpec(kind, value)


def tangent_spec(segments: list[Segment], at: np.ndarray, lo: np.ndarray, hi: np.ndarray, fixed: float,
                 side_is_x: bool) -> TangentSpec:
    """Tangential condition for momentum volumes centred at ``at`` spanning [lo, hi] along the side."""
    frac = np.zeros(len(at))
    value = np.zeros(len(at))
    for k, s in enumerate(at):
        width = hi[k] - lo[k]
        share = 0.0
        for n, g in enumerate(segments):
            if not _tangent_fixed(g.condition):
                continue
            a = -np.inf if n == 0 else g.start
            b = np.inf if n == len(segments) - 1 else g.end
            share += max(0.0, min(hi[k], b) - max(lo[k], a))
        frac[k] = min(1.0, share / width)
        if frac[k] > 0:
            cond = _segment_at(segments, float(s), prefer_fixed=True).condition
            x, y = (s, fixed) if side_is_x else (fixed, s)
            u, v = _velocity(cond, x, y, side_is_x)
            value[k] = u if side_is_x else v
    return TangentSpec(frac, value)


@dataclass(frozen=True)
class Boundaries:
    """Segments of the four sides of the domain."""

    west: list[Segment]
    east: list[Segment]
    south: list[Segment]
    north: list[Segment]

    def all_fixed(self) -> bool:
        """True when no side lets mass in or out freely (then pressure needs a fixed level)."""
        return not any(isinstance(g.condition, (TotalPressure, Open))
                       for side in (self.west, self.east, self.south, self.north) for g in side)
