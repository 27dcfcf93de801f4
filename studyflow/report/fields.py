"""Field pictures of the finest case and the mesh family, coarse to fine.

pyvista draws the pictures in a child process (``fieldrender.py``) so a missing OpenGL library or a
VTK crash cannot end the report; for any picture the child did not deliver, a matplotlib picture of
the same field is drawn instead and the report says why.
"""

from __future__ import annotations

import json
import math
import os
import subprocess
import sys
import tempfile
import time
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from matplotlib.collections import PolyCollection
from matplotlib.figure import Figure
from matplotlib.patches import Rectangle
from matplotlib.tri import Triangulation

from . import style
from .figures.common import new_figure
from .settings import FIELD_SUFFIXES, MESH_SUFFIXES

MAX_ARRAYS = 4
FRAME = (900, 520)  # pixels of an off-screen field picture
MAX_DRAWN_CELLS = 60_000  # above this, the mesh drawing shows the outline only
SURFACE_TYPES = {"triangle": 3, "quad": 4, "triangle6": 3, "quad8": 4, "quad9": 4}
SKIP_ARRAYS = {"vtkOriginalPointIds", "vtkOriginalCellIds", "gmsh:physical", "gmsh:geometrical", "cell_tags"}


@dataclass(frozen=True)
class PictureJob:
    file: Path
    array: str
    association: str  # point | cell
    png: Path
    title: str
    window: tuple[float, float, float, float] | None = None  # x0, x1, y0, y1 (report.view)


def stretch_for(window: tuple[float, float, float, float], frame: float = FRAME[0] / FRAME[1]) -> float:
    """The y stretch that lets a window much wider than tall fill a picture of aspect ``frame``:
    1 unless the window is more than twice as wide (relative to the frame), else the nearest of
    2, 5, 10, 20, 50, ... at or below the ratio."""
    x0, x1, y0, y1 = window
    ratio = (x1 - x0) / (y1 - y0) / frame
    if ratio < 2.0:
        return 1.0
    decade = 10.0 ** math.floor(math.log10(ratio))
    return max(m * decade for m in (1.0, 2.0, 5.0) if m * decade <= ratio)


def window_note(window: tuple[float, float, float, float]) -> str:
    x0, x1, y0, y1 = window
    k = stretch_for(window)
    return f"x in [{x0:g}, {x1:g}], y in [{y0:g}, {y1:g}]" + (f", y stretched by {k:g}" if k > 1 else "")


def find_field_file(folder: Path, declared: tuple[str, ...], suffixes: tuple[str, ...] = FIELD_SUFFIXES) -> Path | None:
    """The case's field file: the first declared one that exists, else the first field-like file found."""
    for rel in declared:
        path = folder / rel
        if path.is_file() and path.suffix.lower() in suffixes:
            return path
    for pattern in ("*", "*/*"):
        for path in sorted(folder.glob(pattern)):
            if path.suffix.lower() in suffixes and path.is_file() and ".studyflow" not in path.parts:
                return path
    return None


def find_mesh_file(folder: Path, declared: tuple[str, ...]) -> Path | None:
    """A file holding the case's mesh: a field file, else a mesh-only file (gmsh)."""
    return find_field_file(folder, declared, FIELD_SUFFIXES) or find_field_file(folder, declared, MESH_SUFFIXES)


def read_mesh(path: Path):
    import contextlib
    import io

    import meshio

    with contextlib.redirect_stdout(io.StringIO()):  # meshio's gmsh reader prints blank lines
        try:
            return meshio.read(str(path))
        except SystemExit:
            # meshio.read ends the process on a damaged file; here it costs one picture, not the report
            raise ValueError(f"{path}: meshio cannot read it as {path.suffix or 'a mesh'} "
                             "(damaged or incomplete file)") from None


def choose_arrays(mesh) -> list[tuple[str, str]]:
    """Up to ``MAX_ARRAYS`` (name, association) pairs worth drawing; point data first.

    A cell array with no finite value on the surface cells (a wall quantity stored on boundary
    lines only, NaN on the cells) would draw as a blank picture and is left out.
    """
    out: list[tuple[str, str]] = []
    for name in mesh.point_data:
        if name not in SKIP_ARRAYS and np.isfinite(_values(mesh, name, "point")).any():
            out.append((name, "point"))
    for name in mesh.cell_data:
        if name in SKIP_ARRAYS or name in [n for n, _ in out]:
            continue
        try:
            values = _values(mesh, name, "cell")
        except ValueError:  # no surface cells at all
            continue
        if values.size and np.isfinite(values).any():
            out.append((name, "cell"))
    return out[:MAX_ARRAYS]


class PendingPictures:
    """The child renderer at work: started by ``start_pictures``, answered by ``result()``.

    Started before the matplotlib figures are drawn, so the two use both cores of a small machine.
    """

    def __init__(self, jobs: list[PictureJob], argv: list[str] | None, timeout: float):
        self.jobs, self.timeout, self.proc, self.failure = jobs, timeout, None, ""
        self.tmp = tempfile.TemporaryDirectory(prefix="studyflow-render-")
        job_file = Path(self.tmp.name) / "job.json"
        job_file.write_text(json.dumps({
            "size": list(FRAME),
            "items": [{"file": str(j.file), "array": j.array, "association": j.association,
                       "png": str(j.png), "title": j.title,
                       **({"window": list(j.window), "stretch": stretch_for(j.window)} if j.window else {})}
                      for j in jobs],
        }), encoding="utf-8")
        command = (argv or [sys.executable, str(Path(__file__).with_name("fieldrender.py"))]) + [str(job_file)]
        env = dict(os.environ)
        env.setdefault("VTK_DEFAULT_OPENGL_WINDOW", "vtkEGLRenderWindow")
        self.out = Path(self.tmp.name) / "stdout"
        self.err = Path(self.tmp.name) / "stderr"
        try:
            with self.out.open("wb") as out, self.err.open("wb") as err:
                self.proc = subprocess.Popen(command, stdout=out, stderr=err, stdin=subprocess.DEVNULL, env=env)
        except OSError as exc:
            self.failure = f"the off-screen renderer could not start: {exc}"
        self.started = time.monotonic()

    def cancel(self) -> None:
        if self.proc is not None and self.proc.poll() is None:
            self.proc.kill()
            self.proc.wait()
        self.tmp.cleanup()

    def result(self) -> dict[Path, str]:
        try:
            return self._result()
        finally:
            self.tmp.cleanup()

    def _result(self) -> dict[Path, str]:
        jobs = self.jobs
        if self.proc is None:
            return {j.png: self.failure for j in jobs}
        try:
            self.proc.wait(max(1.0, self.timeout - (time.monotonic() - self.started)))
        except subprocess.TimeoutExpired:
            self.proc.kill()
            self.proc.wait()
            return {j.png: f"the off-screen renderer did not finish within {self.timeout:.0f} s" for j in jobs}
        stdout = self.out.read_text(encoding="utf-8", errors="replace")
        stderr = self.err.read_text(encoding="utf-8", errors="replace")
        code = self.proc.returncode
        if code != 0:
            tail = stderr.strip().splitlines()[-1:] or [""]
            why = f"the off-screen renderer stopped with exit code {code}"
            if code < 0:
                why = f"the off-screen renderer crashed (signal {-code})"
            why += f": {tail[0]}" if tail[0] else ""
            return {j.png: why for j in jobs}
        try:
            reported = json.loads(stdout.strip().splitlines()[-1])
        except (ValueError, IndexError):
            return {j.png: "the off-screen renderer gave no readable answer" for j in jobs}
        out = {}
        for j in jobs:
            status = reported.get(str(j.png), "the off-screen renderer skipped this picture")
            if status == "ok" and not (j.png.is_file() and j.png.stat().st_size > 0):
                status = "the off-screen renderer reported success but wrote no picture"
            out[j.png] = status
        return out


def start_pictures(jobs: list[PictureJob], argv: list[str] | None = None, timeout: float = 240.0) -> PendingPictures:
    """Start the child renderer on ``jobs`` and return at once; ``.result()`` waits for it.

    ``argv`` replaces the child command (tests use it to simulate a crashing renderer).
    """
    return PendingPictures(jobs, argv, timeout)


def render_pictures(jobs: list[PictureJob], argv: list[str] | None = None, timeout: float = 240.0) -> dict[Path, str]:
    """Run the child renderer on ``jobs``; returns png -> "ok" or the reason it was not drawn."""
    if not jobs:
        return {}
    return start_pictures(jobs, argv, timeout).result()


def _surface(mesh) -> tuple[np.ndarray, list[np.ndarray], list[tuple[str, int, int]]]:
    """2D points and the polygon blocks of the mesh's surface cells, with (type, block index, count)."""
    pts = np.asarray(mesh.points, dtype=float)[:, :2]
    polys, blocks = [], []
    for i, block in enumerate(mesh.cells):
        n = SURFACE_TYPES.get(block.type)
        if n:
            polys.append(np.asarray(block.data)[:, :n])
            blocks.append((block.type, i, len(block.data)))
    return pts, polys, blocks


def _values(mesh, array: str, association: str) -> np.ndarray:
    if association == "point":
        v = np.asarray(mesh.point_data[array], dtype=float)
    else:
        _, _, blocks = _surface(mesh)
        v = np.concatenate([np.asarray(mesh.cell_data[array][i], dtype=float) for _, i, _ in blocks])
    return np.linalg.norm(v, axis=1) if v.ndim > 1 and v.shape[1] > 1 else v.reshape(len(v))


def fallback_picture(mesh, array: str, association: str, title: str,
                     window: tuple[float, float, float, float] | None = None) -> Figure:
    """The same field drawn with matplotlib (tripcolor over the surface cells split into triangles),
    limited to ``window`` (x0, x1, y0, y1) with y stretched as ``stretch_for`` says, if given."""
    fig, (ax,) = new_figure(1, ncols=1, panel_size=(6.0, 3.6))
    pts, polys, _ = _surface(mesh)
    ax.set_title(title if window is None else f"{title} ({window_note(window)})", loc="left")
    ax.set_xlabel("x")
    ax.set_ylabel("y")
    ax.set_aspect("equal" if window is None else stretch_for(window))
    if window is not None:
        ax.set_xlim(window[0], window[1])
        ax.set_ylim(window[2], window[3])
    ax.grid(False)
    if not polys:
        ax.text(0.5, 0.5, "no surface cells to draw", transform=ax.transAxes, ha="center")
        return fig
    tris, owner = [], []
    k = 0
    for cells in polys:
        for j in range(1, cells.shape[1] - 1):  # fan split: a quad becomes two triangles
            tris.append(cells[:, [0, j, j + 1]])
            owner.append(np.arange(k, k + len(cells)))
        k += len(cells)
    tri = Triangulation(pts[:, 0], pts[:, 1], np.concatenate(tris))
    values = _values(mesh, array, association)
    if association == "point":
        art = ax.tripcolor(tri, values, shading="gouraud", cmap="cividis")
    else:
        # no antialiasing: the seams between the two triangles of a quad would show as light lines
        art = ax.tripcolor(tri, facecolors=values[np.concatenate(owner)], cmap="cividis", antialiased=False)
    fig.colorbar(art, ax=ax, label=array)
    return fig


def detail_window(pts: np.ndarray, fraction: float = 0.2) -> tuple[float, float, float, float]:
    """A square window, ``fraction`` of the mesh's larger extent wide, around the mesh point nearest
    to the lower-left quarter point of its bounding box (inside the domain even for a ring)."""
    lo, hi = pts.min(axis=0), pts.max(axis=0)
    target = lo + 0.25 * (hi - lo)
    centre = pts[int(np.argmin(((pts - target) ** 2).sum(axis=1)))]
    half = 0.5 * fraction * float(max(hi - lo))
    return centre[0] - half, centre[0] + half, centre[1] - half, centre[1] + half


def _draw_mesh(ax, pts: np.ndarray, polys: list[np.ndarray]) -> None:
    for cells in polys:
        ax.add_collection(PolyCollection(pts[cells], facecolors="none", edgecolors=style.LEVEL_RAMP[3],
                                         linewidths=0.35))


def mesh_family(meshes: list[tuple[str, object]]) -> Figure:
    """The meshes of one point, coarse to fine: each whole (top row) and the same small window of each
    (bottom row, marked on the top row) so the refinement stays visible when the whole mesh is a blur."""
    n = len(meshes)
    fig, axes = new_figure(2 * n, ncols=n, panel_size=(3.0, 2.5) if n > 2 else (3.6, 2.8))
    window = None
    for i, (title, mesh) in enumerate(meshes):
        ax, detail = axes[i], axes[n + i]
        pts, polys, blocks = _surface(mesh)
        ncells = sum(k for _, _, k in blocks)
        ax.set_title(f"{title}: {ncells} cells", loc="left")
        for a in (ax, detail):
            a.set_aspect("equal")
            a.grid(False)
            a.set_xlabel("x")
            a.set_ylabel("y")
        if not polys:
            ax.plot(pts[:, 0], pts[:, 1], ",", color=style.INK)
            detail.remove()
            continue
        if window is None:
            window = detail_window(pts)
        x0, x1, y0, y1 = window
        if ncells > MAX_DRAWN_CELLS:
            lo, hi = pts.min(axis=0), pts.max(axis=0)
            ax.plot([lo[0], hi[0], hi[0], lo[0], lo[0]], [lo[1], lo[1], hi[1], hi[1], lo[1]], color=style.INK)
            ax.text(0.5, 0.5, "too many cells to draw;\noutline only", transform=ax.transAxes, ha="center",
                    va="center", fontsize=8, color=style.PENDING)
            # the window still shows the cells: keep only those with a vertex inside it
            inside = (pts[:, 0] >= x0) & (pts[:, 0] <= x1) & (pts[:, 1] >= y0) & (pts[:, 1] <= y1)
            _draw_mesh(detail, pts, [c[inside[c].any(axis=1)] for c in polys])
        else:
            _draw_mesh(ax, pts, polys)
            _draw_mesh(detail, pts, polys)
        ax.autoscale_view()
        ax.add_patch(Rectangle((x0, y0), x1 - x0, y1 - y0, fill=False, edgecolor=style.ACCENT, lw=1.0))
        detail.set_xlim(x0, x1)
        detail.set_ylim(y0, y1)
        detail.set_title(f"{title}: detail", loc="left", fontweight="normal")
    return fig
