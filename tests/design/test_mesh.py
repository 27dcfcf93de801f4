"""The mesh family: sizes per level, the representative cell size h and the refinement ratio."""

from __future__ import annotations

import math

import pytest

from studyflow.design.mesh import h_from_cells, h_from_counts, mesh_dim, mesh_levels
from studyflow.spec.model import MeshSpec


def test_counts_multiplied_by_a_constant_ratio() -> None:
    levels = mesh_levels(MeshSpec(levels=3, ratio=2, counts={"nx": 32, "ny": 16}, extent=[2.0, 1.0]))
    assert [m.sizes for m in levels] == [{"nx": 32, "ny": 16}, {"nx": 64, "ny": 32}, {"nx": 128, "ny": 64}]
    # h = (prod L / prod N)^(1/d), Celik et al. 2008 eq. 1 for a uniform grid: (2*1/(32*16))^(1/2).
    assert levels[0].h == pytest.approx(math.sqrt(2.0 / 512))
    assert [m.ratio for m in levels] == [None, pytest.approx(2.0), pytest.approx(2.0)]
    assert [m.cells for m in levels] == [512, 2048, 8192]


def test_non_integer_per_level_ratios_round_counts() -> None:
    levels = mesh_levels(MeshSpec(levels=3, ratio=[1.5, 1.3], counts={"nx": 20}))
    # 20 * 1.5 = 30; 30 * 1.3 = 39 exactly; counts are whole numbers, rounded half up.
    assert [m.sizes["nx"] for m in levels] == [20, 30, 39]
    # The ratio seen by the analysis is the one of the rounded counts (h ~ 1/N in 1-D).
    assert levels[2].ratio == pytest.approx(39 / 30)
    levels = mesh_levels(MeshSpec(levels=2, ratio=1.41, counts={"nx": 11}))
    assert levels[1].sizes["nx"] == 16  # 15.51 rounds to 16


def test_spacings_divided_by_the_ratio() -> None:
    levels = mesh_levels(MeshSpec(levels=3, ratio=2, spacings={"dx": 0.4, "dy": 0.1}))
    assert levels[2].sizes == {"dx": pytest.approx(0.1), "dy": pytest.approx(0.025)}
    # h = (dx * dy)^(1/2): the edge of the square of equal area (common practice).
    assert levels[0].h == pytest.approx(0.2)
    assert levels[1].ratio == pytest.approx(2.0)


def test_explicit_list_with_given_h() -> None:
    levels = mesh_levels(MeshSpec.model_validate({"list": [{"nx": 20, "h": 0.05}, {"nx": 40, "h": 0.025},
                                                           {"nx": 70, "h": 0.0143}]}))
    assert [m.level for m in levels] == [0, 1, 2]
    assert levels[2].ratio == pytest.approx(0.025 / 0.0143)
    assert levels[0].levels == 3


def test_h_from_collected_cells() -> None:
    # h = (V/N)^(1/d), Celik et al. 2008 eq. 1: 1000 cells in a unit cube give h = 0.1.
    assert h_from_cells(1000, 1.0, 3) == pytest.approx(0.1)
    assert h_from_counts([10, 10, 10]) == pytest.approx(0.1)
    spec = MeshSpec(levels=2, counts={"nx": 8, "ny": 8}, cells_from="cells", measure=2.0)
    assert [m.h for m in mesh_levels(spec)] == [None, None]  # known only after collection
    assert mesh_dim(spec) == 2
    with pytest.raises(ValueError):
        h_from_cells(0, 1.0, 2)


def test_no_mesh_block_is_one_level() -> None:
    (only,) = mesh_levels(None)
    assert (only.level, only.levels, only.h) == (0, 1, None)
