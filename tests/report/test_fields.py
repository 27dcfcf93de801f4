"""Field pictures: the off-screen renderer in a child process, its fallback, and the mesh family."""

from __future__ import annotations

import sys

import meshio
import numpy as np
import pytest
from matplotlib.collections import PolyCollection
from report_synthetic import write_study, write_vtu

from studyflow.report import build_report
from studyflow.report.fields import PictureJob, fallback_picture, mesh_family, render_pictures


def test_renderer_crash_falls_back_and_says_why(tmp_path):
    root = write_study(tmp_path / "s", res=[1.0e4], angles=[0.0], failed=False, pending=False)
    crash = [sys.executable, "-c", "import os, sys; sys.stderr.write('no GL here\\n'); os.abort()"]
    result = build_report(root, renderer_argv=crash)
    pictures = {f.name: f for f in result.figures if f.name.startswith("field-")}
    assert set(pictures) == {"field-u", "field-p"}
    for f in pictures.values():
        assert "could not be drawn" in f.note and "crashed" in f.note
        assert f.png.stat().st_size > 1000 and b"<svg" in f.svg.read_bytes()[:400]
    page = result.index.read_text()
    assert "The pyvista picture could not be drawn" in page


def test_renderer_that_exits_nonzero_is_reported(tmp_path):
    write_vtu(tmp_path / "f.vtu", 4, 2)
    job = PictureJob(tmp_path / "f.vtu", "u", "point", tmp_path / "u.png", "u")
    status = render_pictures([job], argv=[sys.executable, "-c", "import sys; sys.exit(4)"])
    assert "exit code 4" in status[job.png]


def test_fallback_picture_shows_the_field_values(tmp_path):
    write_vtu(tmp_path / "f.vtu", 6, 3)
    mesh = meshio.read(tmp_path / "f.vtu")
    for name, assoc, values in (("u", "point", mesh.point_data["u"]), ("p", "cell", mesh.cell_data["p"][0])):
        fig = fallback_picture(mesh, name, assoc, name)
        art = fig.axes[0].collections[0]
        shown = np.asarray(art.get_array())
        assert shown.min() == pytest.approx(values.min()) and shown.max() == pytest.approx(values.max())
        assert fig.axes[0].get_xlabel() == "x" and fig.axes[1].get_ylabel() == name  # colour bar names the field


def test_window_limits_the_fallback_picture_and_stretches_y(tmp_path):
    from studyflow.report.fields import stretch_for

    write_vtu(tmp_path / "f.vtu", 6, 3)
    mesh = meshio.read(tmp_path / "f.vtu")
    window = (0.0, 0.9, 0.0, 0.05)  # 18 times wider than tall: y drawn 10 times stretched
    assert stretch_for(window) == 10.0 and stretch_for((0.0, 1.0, 0.0, 1.0)) == 1.0
    ax = fallback_picture(mesh, "u", "point", "u", window).axes[0]
    assert ax.get_xlim() == (0.0, 0.9) and ax.get_ylim() == (0.0, 0.05)
    assert ax.get_aspect() == 10.0 and "y stretched by 10" in ax.get_title(loc="left")


def test_pyvista_draws_only_the_window(tmp_path):
    pytest.importorskip("pyvista")
    write_vtu(tmp_path / "f.vtu", 8, 4)
    inside = PictureJob(tmp_path / "f.vtu", "u", "point", tmp_path / "u.png", "u", (0.0, 0.5, 0.0, 0.2))
    empty = PictureJob(tmp_path / "f.vtu", "u", "point", tmp_path / "e.png", "u", (50.0, 60.0, 50.0, 60.0))
    status = render_pictures([inside, empty])
    if status[inside.png] != "ok" and "no cell" not in status[inside.png]:
        pytest.skip(f"no off-screen OpenGL on this machine: {status[inside.png]}")
    assert status[inside.png] == "ok" and inside.png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert "no cell of the mesh lies in the window" in status[empty.png]


def test_pyvista_renders_off_screen(tmp_path):
    pytest.importorskip("pyvista")
    write_vtu(tmp_path / "f.vtu", 8, 4)
    job = PictureJob(tmp_path / "f.vtu", "u", "point", tmp_path / "u.png", "u")
    status = render_pictures([job])
    if status[job.png] != "ok":
        pytest.skip(f"no off-screen OpenGL on this machine: {status[job.png]}")
    data = job.png.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n" and int.from_bytes(data[16:20], "big") == 900


def test_mesh_family_coarse_to_fine(tmp_path):
    meshes = []
    for level, (nx, ny) in enumerate(((10, 5), (20, 10), (40, 20))):
        write_vtu(tmp_path / f"m{level}.vtu", nx, ny)
        meshes.append((f"level {level}", meshio.read(tmp_path / f"m{level}.vtu")))
    fig = mesh_family(meshes)
    titles = [ax.get_title(loc="left") for ax in fig.axes]
    assert titles == ["level 0: 50 cells", "level 1: 200 cells", "level 2: 800 cells",
                      "level 0: detail", "level 1: detail", "level 2: detail"]
    windows = {(ax.get_xlim(), ax.get_ylim()) for ax in fig.axes[3:]}
    assert len(windows) == 1  # the same window of every level
    (xlim, ylim), = windows
    assert xlim[1] - xlim[0] == pytest.approx(0.2) and ylim[1] - ylim[0] == pytest.approx(0.2)  # 20 % of 1.0
    for ax, (_, mesh) in zip(fig.axes[:3], meshes):
        (polys,) = [c for c in ax.collections if isinstance(c, PolyCollection)]
        assert len(polys.get_paths()) == len(mesh.cells[0].data)
        lo, hi = ax.dataLim.min, ax.dataLim.max
        assert tuple(lo) == pytest.approx((0.0, 0.0)) and tuple(hi) == pytest.approx((1.0, 0.5))


def test_xdmf_fields_are_drawn_through_meshio(tmp_path):
    """meshio's static XDMF (HDF5 heavy data, needs h5py) is read through meshio, not by pyvista itself."""
    pytest.importorskip("h5py")
    write_vtu(tmp_path / "f.vtu", 6, 3)
    mesh = meshio.read(tmp_path / "f.vtu")
    meshio.write(tmp_path / "f.xdmf", mesh)
    job = PictureJob(tmp_path / "f.xdmf", "u", "point", tmp_path / "u.png", "u")
    status = render_pictures([job])
    if "OpenGL" in status[job.png] or "crashed" in status[job.png]:
        pytest.skip(f"no off-screen OpenGL on this machine: {status[job.png]}")
    assert status[job.png] == "ok" and job.png.stat().st_size > 1000


def test_a_damaged_field_file_costs_its_pictures_not_the_report(tmp_path):
    # meshio.read ends the process (sys.exit) when it cannot parse a file (meshio 5, _helpers._read_file);
    # the report must say so and still be written.
    root = write_study(tmp_path / "s", res=[1.0e4], angles=[0.0], failed=False, pending=False)
    damaged = sorted((root / "cases").glob("*/fields.vtu"))
    for path in damaged:
        path.write_text('<VTKFile type="UnstructuredGrid"><truncated', encoding="utf-8")
    result = build_report(root)
    assert damaged and result.index.is_file()
    assert not [f for f in result.figures if f.name.startswith("field-")]
    assert "The field file fields.vtu of" in result.index.read_text()  # the note saying it could not be read
