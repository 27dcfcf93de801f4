"""Golden-free figure checks: labels, scales and data extents read back from the figure objects."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from matplotlib.collections import LineCollection, PolyCollection
from report_synthetic import H0, RATIO, point_id, write_study

from studyflow.report.data import load
from studyflow.report.figures.convergence import error_vs_size, value_vs_size
from studyflow.report.figures.histories import residual_pages
from studyflow.report.figures.profiles import load_reference, profile_panels
from studyflow.report.figures.sweeps import quantity_vs_parameter, swept


@pytest.fixture(scope="module")
def data(tmp_path_factory):
    return load(write_study(tmp_path_factory.mktemp("fig") / "s", fields="none"))


def _unc(data, quantity):
    u = data.uncertainty
    return u[(u.quantity == quantity) & u.coord.isna()]


SIZES = [H0 / RATIO**k for k in range(3)]  # the synthetic study's mesh sizes, coarse to fine


def test_value_against_size(data):
    points = [point_id(1.0e4, 0.0), point_id(1.0e4, 4.0)]
    fig = value_vs_size(data.results, _unc(data, "dp"), "dp", "Pa", points)
    axes = fig.axes
    assert len(axes) == 2
    u = _unc(data, "dp").set_index("point").loc[points[0]]
    ax = axes[0]
    assert ax.get_xlabel() == "mesh size h" and ax.get_ylabel() == "dp [Pa]" and ax.get_title(loc="left") == points[0]
    markers = [line for line in ax.lines if line.get_marker() == "o"]
    assert sorted(float(m.get_xdata()[0]) for m in markers) == pytest.approx(sorted(SIZES))
    star = [line for line in ax.lines if line.get_marker() == "*"][0]
    assert star.get_xdata()[0] == 0.0 and star.get_ydata()[0] == pytest.approx(u.extrapolated)
    band = [c for c in ax.collections if isinstance(c, PolyCollection)][0]
    ys = band.get_paths()[0].vertices[:, 1]
    assert ys.min() == pytest.approx(u.value_fine - u.U) and ys.max() == pytest.approx(u.value_fine + u.U)
    assert ax.get_xlim()[0] == 0.0  # the extrapolation to h = 0 is in view


def test_error_against_size_has_the_formal_slope(data):
    points = list(dict.fromkeys(data.results.point))
    fig = error_vs_size(data.results, _unc(data, "dp"), "dp", 2.0, points)
    (ax,) = fig.axes
    assert ax.get_xscale() == "log" and ax.get_yscale() == "log"
    assert ax.get_xlabel() == "mesh size h" and ax.get_ylabel() == "|dp - dp_ext|"
    slope = [line for line in ax.lines if line.get_linestyle() == ":"][0]
    x, y = slope.get_xdata(), slope.get_ydata()
    # a straight line of slope p on log-log axes: log(y1/y0) / log(x1/x0) = p (analytic)
    assert math.log(y[1] / y[0]) / math.log(x[1] / x[0]) == pytest.approx(2.0)
    # the data: |phi_i - phi_ext| at the three sizes of each fully assessed point (4 of the 6)
    data_lines = [line for line in ax.lines if line.get_marker() == "o"]
    assert len(data_lines) == 4
    u = _unc(data, "dp").set_index("point")
    first = data_lines[0]
    pid = first.get_label().split(" ")[0]
    vals = data.results[(data.results.point == pid) & (data.results.quantity == "dp")].sort_values("level")
    assert first.get_xdata() == pytest.approx(SIZES)
    assert first.get_ydata() == pytest.approx(np.abs(vals.value.to_numpy() - u.loc[pid].extrapolated))


def test_sweep_against_reynolds_number(data):
    params = swept(data.results, data.parameters)
    assert params == ["Re", "angle"]
    fig = quantity_vs_parameter(data.results, _unc(data, "dp"), "dp", "Pa", "Re", ["angle"])
    assert len(fig.axes) == 2  # one panel per louvre angle
    ax = fig.axes[0]
    assert ax.get_xlabel() == "Re" and ax.get_ylabel() == "dp [Pa]" and ax.get_xscale() == "log"
    assert ax.get_title(loc="left") == "angle = 0"
    level0 = [line for line in ax.lines if line.get_label() == "level 0"][0]
    assert sorted(level0.get_xdata()) == [1.0e4, 3.0e4, 1.0e5]
    # error bars on the finest level: +-U of the analysis for the points it assessed
    bars = ax.containers[0]
    segs = bars.lines[2][0].get_segments()
    u = _unc(data, "dp").set_index("point")
    half = sorted((s[1, 1] - s[0, 1]) / 2 for s in segs if s[1, 1] != s[0, 1])
    expected = sorted(u.loc[[point_id(r, 0.0) for r in (1.0e4, 3.0e4)], "U"])
    assert half == pytest.approx(expected)
    ext = [line for line in ax.lines if line.get_label() == "extrapolated"][0]
    assert np.isfinite(ext.get_ydata()).sum() == 2  # the third point has no finest case yet


def test_residual_small_multiples(data):
    cases = list(dict.fromkeys(data.results.case))
    status = dict(zip(data.cases_table.case, data.cases_table.status))
    (fig,) = residual_pages(data.histories, cases, ["mass", "momentum"], 1.0e-6, status)
    assert fig.studyflow_panels == cases
    lo, hi = fig.studyflow_scale["decades"]
    assert lo <= -6 <= hi  # the tolerance is inside the drawn range
    (ax,) = fig.axes
    assert ax.get_xlabel() == "iteration" and ax.get_ylabel() == "residual (log scale)"
    lines = [c for c in ax.collections if isinstance(c, LineCollection)]
    by_label = {c.get_label(): c for c in lines}
    finished = data.histories.case.nunique()
    assert len(by_label["mass"].get_segments()) == finished
    tol = by_label["tolerance 1e-06"].get_segments()
    assert len(tol) == len(cases)
    # the tolerance sits at the same height in every panel, (log10(tol) - lo) / (hi - lo) above its foot
    feet = sorted({round(s[0, 1] - (math.log10(1e-6) - lo) / (hi - lo), 9) for s in tol})
    assert len(feet) == math.ceil(len(cases) / 8)
    titles = {t.get_text(): t for t in ax.texts}
    failed = [c for c, s in status.items() if s == "failed"][0]
    assert f"{failed} (failed)" in titles and "failed, no history" in titles


def test_profile_with_blasius_reference(data):
    ref = data.settings.references["cf"]
    frame = load_reference(ref, "study.yaml")
    point = point_id(1.0e4, 0.0)
    fig = profile_panels(data.results, data.uncertainty, "cf", None, [point, point_id(3.0e4, 0.0)], frame,
                         ref.label, ref.point)
    a0, a1 = fig.axes
    assert a0.get_xlabel() == "station coordinate" and a0.get_ylabel() == "cf"
    refline = [line for line in a0.lines if line.get_label() == "Blasius"][0]
    x = refline.get_xdata()
    # Blasius flat-plate skin friction cf = 0.664 / sqrt(Re_x) (Blasius 1908; from memory)
    assert refline.get_ydata() == pytest.approx(0.664 / np.sqrt(1.0e4 * x))
    assert not [line for line in a1.lines if line.get_label() == "Blasius"]  # named for the first point only
    levels = [line for line in a0.lines if line.get_label().startswith("level")]
    assert len(levels) == 3 and min(levels[0].get_xdata()) == pytest.approx(0.1)


def test_sweep_with_a_reference_curve(data):
    """A reference table over a swept parameter is drawn as given (here cd-like values invented for the test)."""
    ref = pd.DataFrame({"x": [1.0e4, 5.0e4, 1.0e5], "y": [12.5, 5.5, 3.9]})
    fig = quantity_vs_parameter(data.results, _unc(data, "dp"), "dp", "Pa", "Re", ["angle"], ref, "tunnel data")
    line = [ln for ln in fig.axes[0].lines if ln.get_label() == "tunnel data"][0]
    assert list(line.get_xdata()) == [1.0e4, 5.0e4, 1.0e5] and list(line.get_ydata()) == [12.5, 5.5, 3.9]


def test_space_filling_design_is_drawn_as_a_scatter():
    """Every point varies both parameters (as a Latin hypercube does): no curve holds the other fixed."""
    rng = np.random.default_rng(3)
    rows = []
    for i, (re, ang) in enumerate(zip(rng.uniform(1e4, 1e5, 8), rng.uniform(0, 4, 8))):
        for level in range(3):
            rows.append({"point": f"s{i}", "case": f"s{i}--m{level}", "level": level, "Re": re, "angle": ang,
                         "quantity": "dp", "kind": "scalar", "status": "done", "value": 1.0 + level, "h": 0.1})
    results = pd.DataFrame(rows)
    fig = quantity_vs_parameter(results, None, "dp", "Pa", "Re", ["angle"])
    (ax,) = fig.axes
    assert ax.get_title(loc="left") == "all points"
    for line in ax.lines:
        assert line.get_linestyle() == "None" and len(line.get_xdata()) == 8
