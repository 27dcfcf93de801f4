"""The mesh family: one ``MeshLevel`` per level, coarsest first (level 0).

Representative cell size h (common practice; Celik et al. 2008, eq. 1, for the counts form):

* from counts per direction with domain lengths ``extent``: h = (prod L_i / prod N_i)^(1/d);
  without ``extent`` the lengths are taken as 1, so h is relative but its ratios are exact;
* from spacings per direction: h = (prod dx_i)^(1/d);
* from an explicit list: the entry's ``h`` if given, else as above from its sizes;
* later, from a collected cell count N and the domain measure V: h = (V / N)^(1/d)
  (``h_from_cells``; used by the collection layer when ``mesh.cells_from`` is set).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

from ..spec.model import MeshSpec


@dataclass(frozen=True)
class MeshLevel:
    level: int
    levels: int
    sizes: dict[str, float | int] = field(hash=False)
    h: float | None  # None when h comes from a collected cell count (mesh.cells_from)
    ratio: float | None  # h of the next coarser level / h of this one; None on level 0
    cells: int | None  # product of integer counts, when counts are known

    def context(self) -> dict[str, Any]:
        """The ``mesh`` variable of the template context."""
        return {"level": self.level, "levels": self.levels, "h": self.h, "ratio": self.ratio,
                "cells": self.cells, "sizes": dict(self.sizes), **self.sizes}


def h_from_counts(counts: list[float], extent: list[float] | None = None) -> float:
    """h = (prod L_i / prod N_i)^(1/d) (Celik et al. 2008, eq. 1 in its per-direction form)."""
    d = len(counts)
    lengths = extent if extent is not None else [1.0] * d
    return float((math.prod(lengths) / math.prod(counts)) ** (1.0 / d))


def h_from_spacings(spacings: list[float]) -> float:
    """h = (prod dx_i)^(1/d): the edge of a cube with the cell's volume (common practice)."""
    return float(math.prod(spacings) ** (1.0 / len(spacings)))


def h_from_cells(cells: float, measure: float, dim: int) -> float:
    """h = (V / N)^(1/d) from a total cell count N over a domain of measure V (Celik et al. 2008, eq. 1)."""
    if cells <= 0 or measure <= 0:
        raise ValueError(f"cells ({cells}) and measure ({measure}) must be positive")
    return float((measure / cells) ** (1.0 / dim))


def _count(value: float) -> int:
    # Counts must be whole; non-integer ratios make them fractional, so round half up.
    return max(1, int(math.floor(value + 0.5)))


def mesh_levels(spec: MeshSpec | None) -> list[MeshLevel]:
    """Every level of the family, coarsest first. No mesh block gives one level without sizes."""
    if spec is None:
        return [MeshLevel(0, 1, {}, None, None, None)]
    n = spec.level_count()
    ratios = spec.ratios()
    scale = [math.prod(ratios[:k]) for k in range(n)]
    rows: list[tuple[dict[str, float | int], float | None, int | None]] = []
    from_cells = spec.cells_from is not None
    if spec.counts is not None:
        for k in range(n):
            sizes = {name: _count(c * scale[k]) for name, c in spec.counts.items()}
            h = h_from_counts(list(sizes.values()), spec.extent)
            if spec.h is not None:
                h = spec.h * h / h_from_counts(list(spec.counts.values()), spec.extent)
            rows.append((sizes, h, math.prod(sizes.values())))
    elif spec.spacings is not None:
        for k in range(n):
            sizes = {name: float(s / scale[k]) for name, s in spec.spacings.items()}
            rows.append((sizes, spec.h / scale[k] if spec.h is not None else h_from_spacings(list(sizes.values())),
                         None))
    else:
        for entry in spec.list_ or []:
            sizes = {k: (int(v) if float(v).is_integer() else float(v)) for k, v in entry.items() if k != "h"}
            h = entry.get("h")
            cells = math.prod(sizes.values()) if sizes and all(isinstance(v, int) for v in sizes.values()) else None
            if h is None and sizes and not from_cells:
                h = h_from_counts(list(sizes.values())) if cells is not None else h_from_spacings(list(sizes.values()))
            rows.append((sizes, float(h) if h is not None else None, cells))
    out = []
    for k, (sizes, h, cells) in enumerate(rows):
        if from_cells:
            h = None
        prev = rows[k - 1][1] if k else None
        ratio = (prev / h) if (k and prev and h) else None
        out.append(MeshLevel(k, len(rows), sizes, h, ratio, cells))
    return out


def mesh_dim(spec: MeshSpec | None) -> int | None:
    """The space dimension d used in h = (V/N)^(1/d): ``mesh.dim``, else the number of size directions."""
    if spec is None:
        return None
    if spec.dim is not None:
        return spec.dim
    if spec.counts is not None:
        return len(spec.counts)
    if spec.spacings is not None:
        return len(spec.spacings)
    if spec.list_:
        return len([k for k in spec.list_[0] if k != "h"]) or None
    return None
