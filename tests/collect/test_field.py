"""The field collector against analytic fields on the unit square written with meshio.

Analytic sources (calculus):
  * integral over [0,1]^2 of f(x, y) = x*y is (1/2)*(1/2) = 1/4, its mean 1/4;
  * along the top edge y = 1, f = x, whose integral over [0, 1] is 1/2;
  * f = x*y is bilinear, so on axis-aligned quads VTK's bilinear interpolation and the corner-mean
    cell rule reproduce it exactly; on triangles the linear interpolant's integral converges as h^2
    (common practice: the error of piecewise-linear interpolation is O(h^2)).
"""

from __future__ import annotations

import json
from pathlib import Path

import meshio
import numpy as np
import pytest

from studyflow.collect.readers.field import cell_measures
from collect_support import bind_one


def unit_square(n: int, cell: str = "quad", with_top_edge: bool = False) -> meshio.Mesh:
    x = np.linspace(0.0, 1.0, n + 1)
    X, Y = np.meshgrid(x, x, indexing="ij")
    pts = np.c_[X.ravel(), Y.ravel(), np.zeros(X.size)]

    def idx(i: int, j: int) -> int:
        return i * (n + 1) + j

    quads = np.array([[idx(i, j), idx(i + 1, j), idx(i + 1, j + 1), idx(i, j + 1)] for i in range(n) for j in range(n)])
    if cell == "quad":
        blocks = [("quad", quads)]
    else:
        blocks = [("triangle", np.vstack([quads[:, [0, 1, 2]], quads[:, [0, 2, 3]]]))]
    tags = [np.zeros(len(blocks[0][1]), dtype=np.int32)]
    if with_top_edge:
        top = np.array([[idx(i, n), idx(i + 1, n)] for i in range(n)])
        blocks.append(("line", top))
        tags.append(np.full(n, 3, dtype=np.int32))
    f = pts[:, 0] * pts[:, 1]
    u = np.c_[pts[:, 1], -pts[:, 0], np.zeros(len(pts))]  # u = (y, -x), |u| = r
    centres = [pts[c].mean(axis=1) for _, c in blocks]
    return meshio.Mesh(pts, blocks, point_data={"f": f, "u": u, "lin": 2 * pts[:, 0] + 3 * pts[:, 1] + 1},
                       cell_data={"tag": tags, "fc": [c[:, 0] * c[:, 1] for c in centres]})


@pytest.fixture
def case(tmp_path: Path) -> Path:
    folder = tmp_path / "case"
    folder.mkdir()
    unit_square(4, "quad", with_top_edge=True).write(folder / "fields.vtu")
    unit_square(8, "triangle").write(folder / "tri.vtu")
    return folder


def value(folder: Path, **options) -> float:
    from studyflow.collect import read_quantity

    r = read_quantity(folder, bind_one({"from": "field", **options}))
    assert r.status == "ok", r.reason
    return r.reading


def test_integral_and_mean_exact_for_bilinear_on_quads(case: Path) -> None:
    assert value(case, file="fields.vtu", array="f", operation="integral").final == pytest.approx(0.25, abs=1e-14)
    assert value(case, file="fields.vtu", array="f", operation="mean").final == pytest.approx(0.25, abs=1e-14)
    # Cell-centred x*y: the midpoint rule is exact for a product of linear factors on a uniform grid.
    assert value(case, file="fields.vtu", array="fc", operation="integral").final == pytest.approx(0.25, abs=1e-14)
    # u_x = y integrates to 1/2 over the square.
    assert value(case, file="fields.vtu", array="u", component=0, operation="integral").final == \
        pytest.approx(0.5, abs=1e-14)


def test_boundary_by_tag_and_by_dimension(case: Path) -> None:
    r = value(case, file="fields.vtu", array="f", operation="integral", region={"tag": "tag", "value": 3})
    assert r.final == pytest.approx(0.5, abs=1e-14)  # integral of x over the top edge
    r = value(case, file="fields.vtu", array="f", operation="mean", region={"cells": "boundary"})
    assert r.final == pytest.approx(0.5, abs=1e-14)  # the top edge has length 1


def test_probe_min_max_and_line(case: Path) -> None:
    assert value(case, file="fields.vtu", array="f", probe=[0.3, 0.7]).final == pytest.approx(0.21, abs=1e-12)
    # A linear field is reproduced exactly by linear interpolation on triangles.
    assert value(case, file="tri.vtu", array="lin", probe=[0.33, 0.41, 0.0]).final == \
        pytest.approx(2 * 0.33 + 3 * 0.41 + 1, abs=1e-12)
    assert value(case, file="fields.vtu", array="f", operation="min").final == 0.0
    assert value(case, file="fields.vtu", array="f", operation="max").final == 1.0
    assert value(case, file="fields.vtu", array="u", component="magnitude", operation="max").final == \
        pytest.approx(np.sqrt(2.0))
    prof = value(case, file="fields.vtu", array="f", line={"start": [0, 0.5], "end": [1, 0.5], "samples": 11})
    assert prof.kind == "profile"
    np.testing.assert_allclose(prof.coord, np.linspace(0, 1, 11), atol=1e-15)
    np.testing.assert_allclose(prof.values, 0.5 * np.linspace(0, 1, 11), atol=1e-12)  # f = x/2 on y = 1/2
    prof = value(case, file="fields.vtu", array="f", line={"start": [0.5, 0], "end": [0.5, 1], "samples": 3,
                                                            "coord": "y"})
    np.testing.assert_allclose(prof.coord, [0.0, 0.5, 1.0])


def test_triangles_converge_at_second_order(tmp_path: Path) -> None:
    errors = []
    for n in (4, 8, 16):
        unit_square(n, "triangle").write(tmp_path / f"t{n}.vtu")
        r = value(tmp_path, file=f"t{n}.vtu", array="f", operation="integral")
        errors.append(abs(r.final - 0.25))
    orders = np.log2(np.array(errors[:-1]) / np.array(errors[1:]))
    np.testing.assert_allclose(orders, 2.0, atol=0.05)


def test_cell_measures_of_unit_cells() -> None:
    # Unit cube, unit prism (area 1/2 x height 1), unit pyramid (1/3 x base x height): geometry.
    cube = np.array([[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0], [0, 0, 1], [1, 0, 1], [1, 1, 1], [0, 1, 1]], float)
    assert cell_measures(cube, "hexahedron", np.arange(8)[None, :])[0] == pytest.approx(1.0)
    prism = np.array([[0, 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, 1], [1, 0, 1], [0, 1, 1]], float)
    assert cell_measures(prism, "wedge", np.arange(6)[None, :])[0] == pytest.approx(0.5)
    pyr = np.array([[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0], [0.5, 0.5, 1]], float)
    assert cell_measures(pyr, "pyramid", np.arange(5)[None, :])[0] == pytest.approx(1 / 3)


def test_vtk_legacy_and_xdmf(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.chdir(tmp_path)  # meshio's time-series writer puts its .h5 in the working folder
    mesh = unit_square(4, "quad")
    mesh.write(tmp_path / "f.vtk")
    mesh.write(tmp_path / "f.xdmf")
    assert value(tmp_path, file="f.vtk", array="f", operation="integral").final == pytest.approx(0.25)
    assert value(tmp_path, file="f.xdmf", array="f", operation="integral").final == pytest.approx(0.25)
    # A time series: the last step by default, another by step:.
    with meshio.xdmf.TimeSeriesWriter(tmp_path / "ts.xdmf") as w:
        w.write_points_cells(mesh.points, mesh.cells)
        for k, t in enumerate((0.0, 1.0, 2.0)):
            w.write_data(t, point_data={"f": (k + 1) * mesh.point_data["f"]})
    assert value(tmp_path, file="ts.xdmf", array="f", operation="integral").final == pytest.approx(0.75)
    assert value(tmp_path, file="ts.xdmf", array="f", operation="integral", step=0).final == pytest.approx(0.25)


def test_failures_are_reported(case: Path, tmp_path: Path) -> None:
    from studyflow.collect import read_quantity

    def reason(**options) -> str:
        r = read_quantity(case, bind_one({"from": "field", **options}))
        assert r.status == "failed"
        return r.reason

    assert reason(file="fields.vtu", array="p", operation="mean") == (
        "fields.vtu: array: no array 'p' (arrays: f (point), u (point), lin (point), tag (cell), fc (cell)) (got 'p')")
    assert reason(file="fields.vtu", array="f", probe=[2.0, 0.5]) == \
        "fields.vtu: probe: the probe point is outside the mesh (got [2.0, 0.5])"
    assert "choose component" in reason(file="fields.vtu", array="u", operation="mean")
    (case / "broken.vtu").write_text("<VTKFile>")
    assert reason(file="broken.vtu", array="f", operation="mean").startswith("broken.vtu: cannot be read as a mesh")
    mesh = unit_square(2)
    mesh.point_data["f"] = mesh.point_data["f"] * np.nan
    mesh.write(case / "nan.vtu")
    assert reason(file="nan.vtu", array="f", operation="max") == "nan.vtu: array 'f', max: non-finite value (got nan)"


def test_xdmf_heavy_data_outside_the_case_is_refused(tmp_path: Path) -> None:
    from studyflow.collect import read_quantity

    outside = tmp_path / "elsewhere"
    outside.mkdir()
    unit_square(2).write(outside / "f.xdmf")
    case = tmp_path / "case"
    case.mkdir()
    text = (outside / "f.xdmf").read_text()
    h5 = json.dumps(str(Path("..") / "elsewhere" / "f.h5"))[1:-1]
    (case / "f.xdmf").write_text(text.replace("f.h5:", f"{h5}:"))
    r = read_quantity(case, bind_one({"from": "field", "file": "f.xdmf", "array": "f", "operation": "mean"}))
    assert r.status == "failed" and r.reason.startswith("f.xdmf: refused: XDMF heavy-data file '../elsewhere/f.h5'")


def test_field_options_checked() -> None:
    from studyflow.errors import CollectError

    for options, message in [
        ({"array": "f"}, "quantities.q: give probe:, line: or operation: integral | mean | min | max"),
        ({"array": "f", "operation": "mean", "probe": [0, 0]}, "operation mean takes no probe"),
        ({"array": "f", "operation": "mean", "region": {"cells": "domain", "tag": "t"}}, "quantities.q.region"),
        ({"array": "f", "line": {"start": [0, 0], "end": [1, 1], "samples": 1}}, "quantities.q.line.samples"),
    ]:
        with pytest.raises(CollectError) as err:
            bind_one({"from": "field", "file": "f.vtu", **options})
        assert message in str(err.value), str(err.value)


def test_cell_data_chosen_explicitly_and_probed(case: Path) -> None:
    from studyflow.collect import read_quantity

    # A probe in cell data gives the value of the cell holding the point: the centre of the
    # 4x4 quad at (0.3, 0.7) is (0.375, 0.625), so x*y there is 0.234375 (arithmetic).
    assert value(case, file="fields.vtu", array="fc", data="cell", probe=[0.3, 0.7]).final == \
        pytest.approx(0.375 * 0.625, abs=1e-12)
    r = read_quantity(case, bind_one({"from": "field", "file": "fields.vtu", "array": "fc", "data": "point",
                                      "operation": "mean"}))
    assert r.reason.startswith("fields.vtu: array: no point-data array 'fc'")
