"""Child process that draws field pictures with pyvista off-screen.

Run as a separate program (``python fieldrender.py job.json``) by ``fields.render_pictures``: a
missing OpenGL library or a crash inside VTK then ends this process only, and the report falls back
to a matplotlib picture of the same field. It imports nothing from studyflow so that it starts fast
and cannot be broken by the rest of the package.

job.json: {"size": [w, h], "items": [{"file", "array", "association", "png", "title"[, "window",
"stretch"]}, ...]}; with a window [x0, x1, y0, y1] only the cells whose centres lie in it are
drawn, with y scaled by "stretch".
It prints one JSON line: {"<png>": "ok" | "<error text>", ...}.
"""

from __future__ import annotations

import json
import os
import sys

# Run by path, this folder is first on sys.path; its module names must not shadow installed packages.
if sys.path and os.path.abspath(sys.path[0]) == os.path.dirname(os.path.abspath(__file__)):
    sys.path.pop(0)


def _load(path: str):
    import pyvista as pv

    if path.lower().endswith((".xdmf", ".xmf")):
        import meshio  # pyvista cannot read meshio's static XDMF itself

        return pv.from_meshio(meshio.read(path))
    return pv.read(path)


def _inside(mesh, window):
    import numpy as np

    x0, x1, y0, y1 = window
    c = mesh.cell_centers().points
    keep = np.nonzero((c[:, 0] >= x0) & (c[:, 0] <= x1) & (c[:, 1] >= y0) & (c[:, 1] <= y1))[0]
    if keep.size == 0:
        raise ValueError(f"no cell of the mesh lies in the window x [{x0}, {x1}], y [{y0}, {y1}]")
    return mesh.extract_cells(keep)


def main(argv: list[str]) -> int:
    os.environ.setdefault("VTK_DEFAULT_OPENGL_WINDOW", "vtkEGLRenderWindow")
    with open(argv[1], encoding="utf-8") as fh:
        job = json.load(fh)
    import pyvista as pv

    pv.OFF_SCREEN = True
    size = tuple(job.get("size", (900, 520)))
    out: dict[str, str] = {}
    cache: dict[str, object] = {}
    for item in job["items"]:
        try:
            mesh = cache.get(item["file"]) or _load(item["file"])
            cache[item["file"]] = mesh
            if item.get("window"):
                mesh = _inside(mesh, item["window"])
            plotter = pv.Plotter(off_screen=True, window_size=size)
            plotter.set_background("#fbfaf6")
            plotter.add_mesh(mesh, scalars=item["array"], preference=item.get("association", "point"),
                             # a window's cells are drawn stretched and dense: the mesh family shows them
                             cmap="cividis", show_edges=mesh.n_cells <= 5000 and not item.get("window"),
                             edge_color="#d9d3c4", line_width=0.5,
                             scalar_bar_args={"title": item["array"], "color": "#1d2a35",
                                              "vertical": True, "position_x": 0.86, "position_y": 0.1,
                                              "height": 0.8, "width": 0.06})
            plotter.add_text(item.get("title", item["array"]), position="upper_left", font_size=10,
                             color="#1d2a35")
            bounds = mesh.bounds
            stretch = float(item.get("stretch", 1.0))
            if stretch != 1.0:
                plotter.set_scale(yscale=stretch)
                bounds = (bounds[0], bounds[1], bounds[2] * stretch, bounds[3] * stretch, bounds[4], bounds[5])
            if abs(bounds[5] - bounds[4]) <= 1e-12 * max(1.0, abs(bounds[1] - bounds[0])):
                plotter.view_xy()
            else:
                plotter.view_isometric()
            plotter.reset_camera(bounds=bounds)
            plotter.camera.zoom(1.25)
            plotter.screenshot(item["png"])
            plotter.close()
            out[item["png"]] = "ok"
        except Exception as exc:  # one bad picture must not cost the others
            out[item["png"]] = f"{type(exc).__name__}: {exc}"
    print(json.dumps(out))
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
