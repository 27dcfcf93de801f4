"""Collector ``field``: a value from a mesh file (VTU, VTK, XDMF) read with meshio.

Operations (``operation:``, inferred from ``probe:`` or ``line:`` when those are given):

* ``probe``: the field interpolated at a point (VTK's cell interpolation, through pyvista);
* ``line``: samples along a segment, a profile against the distance from ``start`` (or x, y, z);
* ``integral``: sum over cells of |cell| times the cell's value (point data: the mean of the
  cell's corner values, which is exact for a field linear on simplices and for a bilinear or
  trilinear field on parallelogram / parallelepiped cells; cell data: the cell value, i.e. the
  midpoint rule);
* ``mean``: the integral divided by the region's measure (length, area or volume);
* ``min`` / ``max``: over the region's nodes (point data) or cells (cell data).

The region is the cells of the highest dimension by default; ``region: {cells: boundary}`` takes
the cells one dimension lower (boundary lines of a 2-D mesh, faces of a 3-D one); ``region: {tag:
ARRAY, value: N}`` the cells whose integer cell-data array equals N (a boundary or zone id; VTU,
VTK and XDMF have no named cell sets, so writers store them as such arrays). Vectors need ``component:`` (an index or
``magnitude``). An XDMF time series gives its last step unless ``step:`` says otherwise; XDMF
heavy-data files must lie inside the case folder.
"""

from __future__ import annotations

import os
import re
import xml.etree.ElementTree as ET
from functools import lru_cache
from pathlib import Path
from typing import Any, Literal

import numpy as np
from pydantic import BaseModel, ConfigDict, Field, model_validator

from ...errors import UnsafePathError
from ...fsutil import confined
from ..values import ReadFailure, Reading
from .base import ReaderOptions

# Corner-node count and simplex decomposition of each linear cell type (VTK node order). Quadratic
# types use their corner nodes, so their measure is that of the straight-sided cell.
_LINE = ((0, 1),)
_TRI = ((0, 1, 2),)
_QUAD = ((0, 1, 2), (0, 2, 3))
_TET = ((0, 1, 2, 3),)
_HEX = ((0, 1, 2, 6), (0, 2, 3, 6), (0, 3, 7, 6), (0, 7, 4, 6), (0, 4, 5, 6), (0, 5, 1, 6))
_WEDGE = ((0, 1, 2, 3), (1, 2, 3, 4), (2, 3, 4, 5))
_PYRAMID = ((0, 1, 2, 4), (0, 2, 3, 4))
CELL_TYPES: dict[str, tuple[int, int, tuple[tuple[int, ...], ...]]] = {
    # name: (dimension, corner nodes, simplices)
    "line": (1, 2, _LINE), "line3": (1, 2, _LINE),
    "triangle": (2, 3, _TRI), "triangle6": (2, 3, _TRI), "triangle7": (2, 3, _TRI),
    "quad": (2, 4, _QUAD), "quad8": (2, 4, _QUAD), "quad9": (2, 4, _QUAD),
    "tetra": (3, 4, _TET), "tetra10": (3, 4, _TET),
    "hexahedron": (3, 8, _HEX), "hexahedron20": (3, 8, _HEX), "hexahedron27": (3, 8, _HEX),
    "wedge": (3, 6, _WEDGE), "wedge15": (3, 6, _WEDGE),
    "pyramid": (3, 5, _PYRAMID), "pyramid13": (3, 5, _PYRAMID),
}
_POINT_CELLS = {"vertex"}


class Region(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)

    cells: Literal["domain", "boundary"] | None = None
    tag: str | None = None
    value: int | None = None

    @model_validator(mode="after")
    def _one(self) -> "Region":
        given = [n for n in ("cells", "tag") if getattr(self, n) is not None]
        if len(given) != 1:
            raise ValueError("a region is either {cells: domain|boundary} or {tag: ARRAY, value: N}")
        if (self.tag is None) != (self.value is None):
            raise ValueError("tag and value go together: {tag: ARRAY, value: N}")
        return self


class Line(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)

    start: list[float] = Field(min_length=2, max_length=3)
    end: list[float] = Field(min_length=2, max_length=3)
    samples: int = Field(101, ge=2, le=100_000)
    coord: Literal["distance", "x", "y", "z"] = "distance"


class FieldOptions(ReaderOptions):
    array: str
    operation: Literal["probe", "line", "integral", "mean", "min", "max"] | None = None
    data: Literal["auto", "point", "cell"] = "auto"
    component: int | Literal["magnitude"] | None = None
    probe: list[float] | None = Field(None, min_length=2, max_length=3)
    line: Line | None = None
    region: Region | None = None
    step: int = -1

    @model_validator(mode="after")
    def _consistent(self) -> "FieldOptions":
        op = self.resolved_operation()
        if op is None:
            raise ValueError("give probe:, line: or operation: integral | mean | min | max")
        if op == "probe" and self.probe is None:
            raise ValueError("operation probe needs probe: [x, y, z]")
        if op == "line" and self.line is None:
            raise ValueError("operation line needs line: {start: [...], end: [...]}")
        if op not in ("probe", "line") and (self.probe is not None or self.line is not None):
            raise ValueError(f"operation {op} takes no probe: or line:")
        if self.series:
            raise ValueError("a field gives one value or a profile, not a series")
        return self

    def resolved_operation(self) -> str | None:
        if self.operation is not None:
            return self.operation
        if self.probe is not None and self.line is None:
            return "probe"
        if self.line is not None and self.probe is None:
            return "line"
        return None


def _heavy_files(path: Path) -> list[str]:
    """The files an XDMF document points at (HDF5 and binary heavy data)."""
    try:
        tree = ET.parse(path)
    except ET.ParseError as exc:
        raise ReadFailure(f"not valid XDMF (XML): {exc}") from None
    out = []
    for item in tree.iter():
        tag = item.tag.split("}")[-1] if isinstance(item.tag, str) else ""
        if tag == "DataItem" and (item.get("Format") or "XML").upper() in ("HDF", "BINARY") and item.text:
            out.append(item.text.strip().split(":", 1)[0])
        elif tag == "include":  # XInclude, whatever namespace spelling the writer used
            out.append(item.get("href") or "")
    return out


def _check_heavy(path: Path, root: Path | None) -> None:
    if root is None:
        return
    base = root.resolve()
    for ref in _heavy_files(path):
        if not ref:
            continue
        rel = Path(ref) if Path(ref).is_absolute() else Path(os.path.relpath(path.parent / ref, base))
        try:
            confined(base, rel, what="XDMF heavy-data file")
        except UnsafePathError as exc:
            raise ReadFailure(f"refused: {exc}", "", ref) from None


@lru_cache(maxsize=4)
def _load(path: str, mtime_ns: int, size: int, step: int) -> Any:
    import meshio  # noqa: PLC0415 - slow to import, only for studies that read fields

    suffix = Path(path).suffix.lower()
    if suffix in (".xdmf", ".xmf") and re.search(rb"CollectionType\s*=\s*[\"']Temporal", Path(path).read_bytes()):
        with meshio.xdmf.TimeSeriesReader(path) as reader:
            points, cells = reader.read_points_cells()
            n = reader.num_steps
            if not -n <= step < n:
                raise ReadFailure(f"step {step} out of range, the time series has {n} steps", "step", step)
            _, point_data, cell_data = reader.read_data(step % n)
        return meshio.Mesh(points, cells, point_data=point_data, cell_data=cell_data)
    # The format's own reader: meshio.read() ends the process (sys.exit) when a file is damaged.
    readers = {".vtu": meshio.vtu.read, ".vtk": meshio.vtk.read, ".xdmf": meshio.xdmf.read, ".xmf": meshio.xdmf.read}
    if suffix not in readers:
        raise ReadFailure(f"unknown mesh format {suffix!r}; the field collector reads .vtu, .vtk, .xdmf, .xmf")
    return readers[suffix](path)


def _points3(mesh: Any) -> np.ndarray:
    pts = np.asarray(mesh.points, dtype=float)
    if pts.shape[1] < 3:
        pts = np.hstack([pts, np.zeros((pts.shape[0], 3 - pts.shape[1]))])
    return pts


def _component(values: np.ndarray, options: FieldOptions) -> np.ndarray:
    values = np.asarray(values, dtype=float)
    if values.ndim == 1:
        if options.component not in (None, 0, "magnitude"):
            raise ReadFailure("the array is scalar; it has no component", "component", options.component)
        return np.abs(values) if options.component == "magnitude" else values
    flat = values.reshape(values.shape[0], -1)
    if options.component is None:
        if flat.shape[1] == 1:
            return flat[:, 0]
        raise ReadFailure(f"the array has {flat.shape[1]} components; choose component: 0..{flat.shape[1] - 1} "
                          "or magnitude", f"array {options.array!r}")
    if options.component == "magnitude":
        return np.linalg.norm(flat, axis=1)
    if not -flat.shape[1] <= options.component < flat.shape[1]:
        raise ReadFailure(f"component out of range, the array has {flat.shape[1]}", "component", options.component)
    return flat[:, options.component]


def _blocks(mesh: Any, options: FieldOptions) -> list[tuple[int, np.ndarray]]:
    """The selected cells: (block index, indices of the cells in that block)."""
    dims = [CELL_TYPES[b.type][0] if b.type in CELL_TYPES else (0 if b.type in _POINT_CELLS else -1)
            for b in mesh.cells]
    region = options.region or Region(cells="domain")
    top = max(dims) if dims else -1
    if region.cells is not None:
        want = top if region.cells == "domain" else top - 1
        chosen = [(i, np.arange(len(b.data))) for i, b in enumerate(mesh.cells) if dims[i] == want]
        if not chosen:
            raise ReadFailure(f"the mesh has no cells of dimension {want}", "region.cells", region.cells)
        return chosen
    tags = mesh.cell_data.get(region.tag)
    if tags is None:
        raise ReadFailure(f"no cell-data array {region.tag!r} (cell data: {', '.join(mesh.cell_data) or 'none'})",
                          "region.tag", region.tag)
    chosen = [(i, np.flatnonzero(np.asarray(t).ravel() == region.value)) for i, t in enumerate(tags)]
    chosen = [(i, idx) for i, idx in chosen if idx.size]
    if not chosen:
        raise ReadFailure(f"no cell has {region.tag} = {region.value}", "region.value", region.value)
    return chosen


def cell_measures(points: np.ndarray, cell_type: str, conn: np.ndarray) -> np.ndarray:
    """Length, area or volume of each cell, by splitting it into simplices (exact for straight-edged
    simplices, parallelograms and parallelepipeds)."""
    if cell_type not in CELL_TYPES:
        raise ReadFailure(f"cell type {cell_type!r} is not supported for integrals")
    dim, _, simplices = CELL_TYPES[cell_type]
    total = np.zeros(conn.shape[0])
    for s in simplices:
        p = [points[conn[:, k]] for k in s]
        if dim == 1:
            total += np.linalg.norm(p[1] - p[0], axis=1)
        elif dim == 2:
            total += 0.5 * np.linalg.norm(np.cross(p[1] - p[0], p[2] - p[0]), axis=1)
        else:
            total += np.abs(np.einsum("ij,ij->i", p[1] - p[0], np.cross(p[2] - p[0], p[3] - p[0]))) / 6.0
    return total


def _data_kind(mesh: Any, options: FieldOptions) -> str:
    in_point = options.array in mesh.point_data
    in_cell = options.array in mesh.cell_data
    if options.data == "point" and not in_point or options.data == "cell" and not in_cell or not (in_point or in_cell):
        have = [f"{n} (point)" for n in mesh.point_data] + [f"{n} (cell)" for n in mesh.cell_data]
        raise ReadFailure(f"no {'' if options.data == 'auto' else options.data + '-data '}array {options.array!r} "
                          f"(arrays: {', '.join(have) or 'none'})", "array", options.array)
    if options.data != "auto":
        return options.data
    return "point" if in_point else "cell"


def _reduce(mesh: Any, options: FieldOptions, op: str) -> float:
    kind = _data_kind(mesh, options)
    blocks = _blocks(mesh, options)
    points = _points3(mesh)
    if kind == "point":
        nodal = _component(mesh.point_data[options.array], options)
    if op in ("min", "max"):
        if kind == "point":
            used = np.unique(np.concatenate([mesh.cells[i].data[idx].ravel() for i, idx in blocks]))
            vals = nodal[used]
        else:
            vals = np.concatenate([_component(mesh.cell_data[options.array][i], options)[idx] for i, idx in blocks])
        return float(vals.min() if op == "min" else vals.max())
    integral, measure = 0.0, 0.0
    for i, idx in blocks:
        block = mesh.cells[i]
        corners = CELL_TYPES.get(block.type, (0, 0, ()))[1]
        conn = np.asarray(block.data)[idx]
        size = cell_measures(points, block.type, conn)
        if kind == "point":
            cell_value = nodal[conn[:, :corners]].mean(axis=1)
        else:
            cell_value = _component(mesh.cell_data[options.array][i], options)[idx]
        integral += float(np.dot(size, cell_value))
        measure += float(size.sum())
    if op == "integral":
        return integral
    if measure <= 0:
        raise ReadFailure("the region has zero measure", "region", options.region)
    return integral / measure


def _pyvista_grid(mesh: Any, options: FieldOptions) -> Any:
    import meshio  # noqa: PLC0415
    import pyvista as pv  # noqa: PLC0415

    blocks = _blocks(mesh, options)
    kind = _data_kind(mesh, options)
    cells = [meshio.CellBlock(mesh.cells[i].type, np.asarray(mesh.cells[i].data)[idx]) for i, idx in blocks]
    point_data, cell_data = {}, {}
    if kind == "point":
        point_data["_value"] = _component(mesh.point_data[options.array], options)
    else:
        cell_data["_value"] = [_component(mesh.cell_data[options.array][i], options)[idx] for i, idx in blocks]
    sub = meshio.Mesh(_points3(mesh), cells, point_data=point_data, cell_data=cell_data)
    return pv.from_meshio(sub)


def _sample(grid: Any, points: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    import pyvista as pv  # noqa: PLC0415

    probe = pv.PolyData(points)
    out = probe.sample(grid)
    values = np.asarray(out.point_data["_value"], dtype=float)
    valid = np.asarray(out.point_data["vtkValidPointMask"]).astype(bool)
    return values, valid


def _xyz(p: list[float]) -> np.ndarray:
    return np.asarray(list(p) + [0.0] * (3 - len(p)), dtype=float)


def read_field(path: Path, options: FieldOptions, root: Path | None = None) -> Reading:
    """A probe value, a line profile, or an integral / mean / min / max of a mesh field."""
    if path.suffix.lower() in (".xdmf", ".xmf"):
        _check_heavy(path, root)
    st = path.stat()
    try:
        mesh = _load(str(path), st.st_mtime_ns, st.st_size, options.step)
    except ReadFailure:
        raise
    except Exception as exc:  # meshio raises many kinds on a damaged or unknown file
        raise ReadFailure(f"cannot be read as a mesh: {type(exc).__name__}: {exc}") from None
    op = options.resolved_operation()
    where = f"array {options.array!r}"
    if op in ("integral", "mean", "min", "max"):
        return Reading.scalar(_reduce(mesh, options, op), f"{where}, {op}")
    grid = _pyvista_grid(mesh, options)
    if op == "probe":
        point = _xyz(options.probe or [])
        values, valid = _sample(grid, point[None, :])
        if not valid[0]:
            raise ReadFailure("the probe point is outside the mesh", "probe", options.probe)
        return Reading.scalar(float(values[0]), f"{where}, probe {options.probe}")
    line = options.line
    assert line is not None
    a, b = _xyz(line.start), _xyz(line.end)
    t = np.linspace(0.0, 1.0, line.samples)
    pts = a[None, :] + t[:, None] * (b - a)[None, :]
    values, valid = _sample(grid, pts)
    if not valid.any():
        raise ReadFailure("the line lies outside the mesh", "line", [line.start, line.end])
    if line.coord == "distance":
        coord = t * float(np.linalg.norm(b - a))
    else:
        coord = pts[:, "xyz".index(line.coord)]
    # Samples off the mesh (a line ending on a curved wall) are left out rather than invented.
    return Reading.profile(coord[valid], values[valid], f"{where}, line")
