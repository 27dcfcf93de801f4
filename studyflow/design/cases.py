"""The case table: parameter points x mesh levels, each case with a stable id.

``build_design(study)`` is deterministic: the same study file gives the same cases, in the same
order, with the same ids, on every machine.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

from ..spec.model import Study
from .ids import assign_point_ids, case_id, raw_point_id
from .mesh import MeshLevel, mesh_dim, mesh_levels
from .params import expand_points

if TYPE_CHECKING:
    import pandas as pd


@dataclass(frozen=True)
class Point:
    id: str
    params: dict[str, Any] = field(hash=False)
    block: int = 0


@dataclass(frozen=True)
class Case:
    id: str
    point: Point
    mesh: MeshLevel

    @property
    def params(self) -> dict[str, Any]:
        return self.point.params

    @property
    def level(self) -> int:
        return self.mesh.level


@dataclass(frozen=True)
class Design:
    points: tuple[Point, ...]
    levels: tuple[MeshLevel, ...]
    cases: tuple[Case, ...]
    parameter_names: tuple[str, ...]  # union over blocks, in first-seen order
    dim: int | None = None

    def __len__(self) -> int:
        return len(self.cases)

    def by_id(self) -> dict[str, Case]:
        return {c.id: c for c in self.cases}

    def frame(self) -> "pd.DataFrame":
        """One row per case: case, point, level, one column per parameter, cells, h (NaN when unknown)."""
        import pandas as pd

        rows = []
        for c in self.cases:
            row: dict[str, Any] = {"case": c.id, "point": c.point.id, "level": c.level}
            for name in self.parameter_names:
                row[name] = c.params.get(name)
            row["cells"] = c.mesh.cells
            row["h"] = c.mesh.h
            rows.append(row)
        return pd.DataFrame(rows, columns=["case", "point", "level", *self.parameter_names, "cells", "h"])


def build_design(study: Study) -> Design:
    raw = expand_points(study)
    ids = assign_point_ids([(p.given_id, raw_point_id(p.values), p.key()) for p in raw])
    points = tuple(Point(pid, p.as_dict(), p.block) for pid, p in zip(ids, raw))
    levels = tuple(mesh_levels(study.mesh))
    names: dict[str, None] = {}
    for p in points:
        for n in p.params:
            names.setdefault(n, None)
    cases = tuple(Case(case_id(p.id, m.level), p, m) for p in points for m in levels)
    return Design(cases=cases, points=points, levels=levels, parameter_names=tuple(names),
                  dim=mesh_dim(study.mesh))
