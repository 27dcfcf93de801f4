"""Table-level assessment of tidy results tables (columns per DEVELOPERS.md)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from studyflow.analysis import COLUMNS, assess, profile_band, profile_summary, three_level
from studyflow.analysis.leastsquares import least_squares_uncertainty
from studyflow.errors import AnalysisError, InputError

H = [0.4, 0.2, 0.1, 0.05]  # coarsest (level 0) to finest


def _row(point, level, h, quantity, value, *, kind="scalar", coord=np.nan, status="done", converged=True, Re=1e4):
    return {"study": "s", "case": f"{point}--m{level}", "point": point, "level": level, "Re": Re, "cells": (1 / h) ** 2, "h": h,
                "quantity": quantity, "kind": kind, "coord": coord, "value": value, "unit": "-", "status": status,
                "converged": converged, "reason": ""}


def _table(levels=(0, 1, 2), law=lambda h: 1.0 + 0.5 * h**2):
    rows = []
    for point, re in (("p1", 1e4), ("p2", 2e4)):
        for lev in levels:
            h = H[lev]
            rows.append(_row(point, lev, h, "drag", law(h), Re=re))
            for x in (0.25, 0.75):
                rows.append(_row(point, lev, h, "cf", x * law(h), kind="profile", coord=x, Re=re))
    return pd.DataFrame(rows)


def test_columns_and_one_row_per_point_quantity_station():
    unc = assess(_table(), None, 2.0)
    assert list(unc.columns) == COLUMNS + ["Re"]  # DEVELOPERS.md "uncertainty" columns plus parameters
    assert len(unc) == 2 * (1 + 2)
    assert set(unc.loc[unc["quantity"] == "cf", "coord"]) == {0.25, 0.75}
    assert unc.loc[unc["quantity"] == "drag", "coord"].isna().all()
    assert dict(zip(unc["point"], unc["Re"])) == {"p1": 1e4, "p2": 2e4}


def test_three_levels_match_the_numerical_function():
    # The table must only group and call: compare with three_level on the same arrays.
    unc = assess(_table(), None, 2.0)
    ref = three_level(np.array([[H[2], H[1], H[0]]]), np.array([[1 + 0.5 * H[2] ** 2, 1 + 0.5 * H[1] ** 2,
                                                                1 + 0.5 * H[0] ** 2]]))
    drag = unc[(unc["quantity"] == "drag") & (unc["point"] == "p1")].iloc[0]
    assert drag["method"] == "three-level"
    assert drag["order"] == pytest.approx(ref.order[0], rel=1e-12)
    assert drag["extrapolated"] == pytest.approx(1.0, rel=1e-12)  # analytic limit of 1 + 0.5 h^2
    assert drag["U"] == pytest.approx(ref.U[0], rel=1e-12)
    assert drag["u_num"] == pytest.approx(ref.U[0] / 1.15, rel=1e-12)  # divisor documented in table.COVERAGE
    assert drag["verdict"] == "in the asymptotic range"
    assert drag["levels"] == 3 and drag["h_fine"] == H[2]


def test_only_done_rows_are_used():
    t = _table(levels=(0, 1, 2, 3))
    t.loc[t["level"] == 3, "status"] = "failed"
    t.loc[t["level"] == 3, "value"] = np.nan
    unc = assess(t, None, 2.0)
    assert (unc["levels"] == 3).all() and (unc["method"] == "three-level").all()


def test_four_levels_use_least_squares():
    t = _table(levels=(0, 1, 2, 3), law=lambda h: 2.0 - 0.3 * h**1.8)
    unc = assess(t, None, 2.0)
    assert (unc["method"] == "least-squares").all()
    drag = unc[(unc["quantity"] == "drag")].iloc[0]
    ref = least_squares_uncertainty(np.array([H[::-1]]), 2.0 - 0.3 * np.array([H[::-1]]) ** 1.8)
    assert drag["U"] == pytest.approx(ref.U[0], rel=1e-9)
    assert drag["order"] == pytest.approx(1.8, rel=1e-6)  # analytic order of the data
    assert drag["verdict"] == "in the asymptotic range"  # 1.8 is within 25 % of the formal 2
    assert drag["extrapolated"] == pytest.approx(2.0, rel=1e-9)


def test_two_levels_and_one_level_are_reported_not_raised():
    t = _table(levels=(1, 2))
    t = pd.concat([t, pd.DataFrame([_row("p3", 2, H[2], "drag", 1.0)])], ignore_index=True)
    unc = assess(t, None, 2.0)
    two = unc[unc["point"] != "p3"]
    assert (two["method"] == "two-level").all()
    assert (two["verdict"] == "order assumed: two levels only").all()
    lone = unc[unc["point"] == "p3"].iloc[0]
    assert lone["method"] == "none" and lone["verdict"] == "cannot assess"
    assert "fewer than two usable mesh levels" in lone["reason"]
    with pytest.raises(AnalysisError, match="fewer than two usable mesh levels"):
        assess(t, None, 2.0, strict=True)


@pytest.mark.parametrize(
    "values,verdict",
    [
        ((1.0, 1.1, 0.8), "oscillatory"),
        ((1.0, 1.3, 1.4), "diverging"),
        ((2.0, 2.0, 2.0), "no discernible mesh dependence"),
        ((2.0, 2.0, 2.1), "indeterminate"),
        # Equal differences on equal ratios: R = 1, no positive order exists (the class boundary).
        ((1.0, 1.25, 1.5), "diverging"),  # exact binary fractions: R = 1 exactly
        ((1.0, 1.01, 1.025), "observed order below formal"),  # p = ln(1.5)/ln(2) = 0.58
        ((1.0, 1.01, 1.1), "not yet asymptotic: refine further"),  # p = ln(9)/ln(2) = 3.17
    ],
)
def test_verdicts_for_awkward_data(values, verdict):
    # values fine -> coarse on h = 0.1, 0.2, 0.4; classes after Stern et al. (2001), from memory.
    rows = [_row("p", lev, H[lev], "q", v) for lev, v in zip((2, 1, 0), values)]
    with np.errstate(all="raise"):
        unc = assess(pd.DataFrame(rows), None, 2.0)
    got = unc.iloc[0]
    assert got["verdict"] == verdict
    assert isinstance(got["reason"], str) and got["reason"]


def test_bad_rows_strict_error_names_row_column_and_value():
    t = _table()
    t.loc[0, "h"] = -1.0
    t.loc[1, "value"] = np.inf
    t = pd.concat([t, t.iloc[[2]]], ignore_index=True)  # a duplicate level
    with pytest.raises(AnalysisError) as exc:
        assess(t, None, 2.0, strict=True, source="study/results/results.parquet")
    text = str(exc.value)
    assert "study/results/results.parquet: h, row 0" in text and "-1.0" in text
    assert "value, row 1" in text and "inf" in text
    assert "duplicate level" in text
    # Lenient mode (study-level): the other groups are still assessed.
    unc = assess(t, None, 2.0)
    assert (unc["verdict"] == "cannot assess").sum() >= 1
    assert (unc["verdict"] == "in the asymptotic range").sum() >= 1


def test_missing_columns_are_input_errors():
    with pytest.raises(InputError, match="required column missing"):
        assess(pd.DataFrame({"point": ["a"], "value": [1.0]}), None, 2.0)


def test_h_from_cells_needs_dimension():
    t = _table().drop(columns=["h"])
    with pytest.raises(InputError, match="dimension"):
        assess(t, None, 2.0)
    unc = assess(t, None, 2.0, dim=2)  # cells = (1/h)^2, so h = (1/cells)^(1/2) recovers H
    assert unc["h_fine"].to_numpy() == pytest.approx(H[2])


def test_iterative_error_from_histories_is_flagged_beside_U():
    t = _table()
    hist = []
    for case in t["case"].unique():
        point, lev = case.split("--m")
        for it in range(1, 201):
            # p1: converged history; p2: still oscillating by 1e-3, well above 1 % of its U.
            wobble = 0.0 if point == "p1" else 1e-3 * np.sin(it)
            hist.append({"study": "s", "case": case, "point": point, "level": int(lev), "quantity": "drag", "iteration": it,
                             "value": 1.0 + wobble + 0.1 * np.exp(-it / 5.0)})
            hist.append({"study": "s", "case": case, "point": point, "level": int(lev), "quantity": "res", "iteration": it,
                             "value": np.exp(-it / 10.0)})
    unc = assess(t, pd.DataFrame(hist), 2.0, residuals=["res"])
    drag = unc[unc["quantity"] == "drag"].set_index("point")
    assert bool(drag.loc["p1", "iterative_ok"]) is True
    assert bool(drag.loc["p2", "iterative_ok"]) is False
    assert "iterative error" in drag.loc["p2", "reason"]
    assert drag.loc["p2", "iterative_error"] == pytest.approx(1e-3, rel=0.05)  # half range of sin over window
    assert unc.loc[unc["quantity"] == "cf", "iterative_ok"].isna().all()  # no history for profiles


def test_profile_summary_average_order():
    unc = assess(_table(), None, 2.0)
    prof = profile_summary(unc)
    assert list(prof["stations"]) == [2, 2]
    assert prof["order_average"].to_numpy() == pytest.approx(2.0, rel=1e-9)  # analytic order of the data


def test_vectorised_table_equals_group_by_group():
    rng = np.random.default_rng(7)
    rows = []
    for g in range(12):
        p, c = rng.uniform(0.6, 3.0), rng.uniform(-1, 1)
        for lev in range(int(rng.integers(2, 5))):
            h = H[lev]
            rows.append(_row(f"g{g}", lev, h, "q", 1.0 + c * h**p + rng.normal(0, 1e-4)))
    t = pd.DataFrame(rows)
    whole = assess(t, None, 2.0).set_index("point")
    for g, part in t.groupby("point"):
        one = assess(part, None, 2.0).iloc[0]
        for col in ("U", "order", "extrapolated"):
            a, b = whole.loc[g, col], one[col]
            assert (np.isnan(a) and np.isnan(b)) or a == pytest.approx(b, rel=1e-12), (g, col)
        assert whole.loc[g, "verdict"] == one["verdict"]


def test_row_order_of_the_table_does_not_matter():
    t = _table(levels=(0, 1, 2, 3), law=lambda h: 1.0 + 0.2 * h**1.7)
    a = assess(t, None, 2.0)
    b = assess(t.sample(frac=1.0, random_state=3), None, 2.0)
    key = ["point", "quantity", "coord"]
    a, b = a.sort_values(key).reset_index(drop=True), b.sort_values(key).reset_index(drop=True)
    pd.testing.assert_frame_equal(a, b, check_exact=False, rtol=1e-12)


def test_a_bad_level_is_left_out_and_the_rest_still_assessed():
    t = _table(levels=(0, 1, 2, 3))
    t.loc[(t["point"] == "p1") & (t["quantity"] == "drag") & (t["level"] == 3), "value"] = np.nan
    unc = assess(t, None, 2.0).set_index(["point", "quantity"])
    row = unc.loc[("p1", "drag")]
    assert row["levels"] == 3 and row["method"] == "three-level"
    assert "rows with a bad size or value were left out" in row["reason"]


def test_profile_stations_that_differ_between_meshes_are_explained():
    t = _table()
    t.loc[(t["kind"] == "profile") & (t["level"] == 0), "coord"] += 1e-3
    unc = assess(t, None, 2.0)
    bad = unc[(unc["quantity"] == "cf") & (unc["verdict"] == "cannot assess")]
    assert len(bad) > 0 and bad["reason"].str.contains("stations must be the same").all()


@pytest.mark.parametrize(
    "values,verdict",
    [
        ((1.0, 1.1, 0.95, 1.2), "not yet asymptotic: refine further"),  # scatter >= data range
        ((3.0, 3.0, 3.0, 3.0), "no discernible mesh dependence"),
        ((1.0, 1.0 + 1e-15, 1.0, 1.0 - 1e-15), "no discernible mesh dependence"),  # rounding only
        ((1.0, 1.01, 1.51, 11.51), "not yet asymptotic: refine further"),  # differences x50, x20: p > 4
    ],
)
def test_four_level_awkward_data_without_exception(values, verdict):
    rows = [_row("p", lev, H[lev], "q", v) for lev, v in zip((3, 2, 1, 0), values)]
    with np.errstate(all="raise"):
        got = assess(pd.DataFrame(rows), None, 2.0).iloc[0]
    assert got["verdict"] == verdict
    assert np.isfinite(got["U"])


def test_profile_band_is_value_plus_minus_U_per_station():
    unc = assess(_table(), None, 2.0)
    band = profile_band(unc)
    assert len(band) == 4 and list(band["coord"][:2]) == [0.25, 0.75]
    cf = unc[unc["quantity"] == "cf"].sort_values(["point", "coord"])
    assert band["upper"].to_numpy() == pytest.approx((cf["value_fine"] + cf["U"]).to_numpy())
    # Analytic data x (1 + 0.5 h^2): the exact profile x lies inside the band at every station.
    assert np.all((band["lower"] <= band["coord"]) & (band["coord"] <= band["upper"]))


def test_history_final_values_are_not_assessed():
    # A history's final value (kind "history", DEVELOPERS.md) is an iterative monitor, not a result.
    t = _table()
    extra = [_row("p1", lev, H[lev], "mass_residual", 1e-9 * (lev + 1), kind="history") for lev in (0, 1, 2)]
    unc = assess(pd.concat([t, pd.DataFrame(extra)], ignore_index=True), None, 2.0)
    assert "mass_residual" not in set(unc["quantity"])
    assert "drag" in set(unc["quantity"])


def test_quantities_selection_from_the_study_and_its_errors():
    class _Analysis:
        formal_order = 2.0
        safety_factor = None
        model_extra = {"quantities": ["drag"]}

    class _Study:
        file = "study.yaml"
        analysis = _Analysis()
        quantities = {"drag": None, "cf": None}
        iteration = None
        mesh = None

    unc = assess(_table(), None, study=_Study())
    assert set(unc["quantity"]) == {"drag"}
    assert set(assess(_table(), None, 2.0, quantities=["cf"])["quantity"]) == {"cf"}
    _Analysis.model_extra = {"quantities": ["drag", "lift"]}
    with pytest.raises(InputError, match=r"study.yaml: analysis.quantities\[1\]: is not a quantity of this study"):
        assess(_table(), None, study=_Study())


def _newton_like_histories(t: pd.DataFrame) -> pd.DataFrame:
    """A monitored drag per case that settles like a Newton solve: changes 1e-2, 1e-4, 1e-8, 1e-12."""
    rows = []
    for case in t["case"].unique():
        point, lev = case.split("--m")
        final = float(t.loc[(t["case"] == case) & (t["quantity"] == "drag"), "value"].iloc[0])
        for it, off in enumerate([1e-2 + 1e-4 + 1e-8 + 1e-12, 1e-4 + 1e-8 + 1e-12, 1e-8 + 1e-12, 1e-12, 0.0]):
            rows.append({"study": "s", "case": case, "point": point, "level": int(lev), "quantity": "drag_history",
                         "iteration": it, "value": final + off})
    return pd.DataFrame(rows)


class _WindowAnalysis:
    formal_order = 2.0
    safety_factor = None
    model_extra: dict = {}


class _WindowStudy:
    file = "study.yaml"
    analysis = _WindowAnalysis()
    quantities = {"drag": None, "cf": None, "drag_history": None}
    iteration = None
    mesh = None


def test_iterative_window_from_the_study_sets_the_estimate():
    # rule (iterative.monitor_error, our documented choice): half the range of the last N values.
    # Hand computation: the last two values differ by 1e-12, so the estimate is 5e-13; with the
    # default window (at least 5 values, here all five) it is half the whole range, 5.0501e-3.
    t = _table()
    hist = _newton_like_histories(t)
    _WindowAnalysis.model_extra = {"monitors": {"drag": "drag_history"}, "iterative_window": 2}
    two = assess(t, hist, study=_WindowStudy(), quantities=["drag"]).set_index("point")
    assert two.loc["p1", "iterative_error"] == pytest.approx(5e-13, rel=1e-3)
    assert bool(two.loc["p1", "iterative_ok"]) is True
    _WindowAnalysis.model_extra = {"monitors": {"drag": "drag_history"}}
    default = assess(t, hist, study=_WindowStudy(), quantities=["drag"]).set_index("point")
    assert default.loc["p1", "iterative_error"] == pytest.approx(0.5 * (1e-2 + 1e-4 + 1e-8 + 1e-12), rel=1e-9)


@pytest.mark.parametrize("key, value, words", [
    ("iterative_window", 1, "2 or more"),
    ("iterative_window", "two", "2 or more"),
    ("coverage", "wide", "must be a number above 0"),
    ("negligible", 2.0, "at most 1"),
    ("weighted", "yes", "true or false"),
    ("monitors", ["drag"], "must map result quantities"),
])
def test_bad_analysis_settings_name_file_key_and_value(key, value, words):
    _WindowAnalysis.model_extra = {key: value}
    with pytest.raises(InputError) as err:
        assess(_table(), None, study=_WindowStudy())
    text = str(err.value)
    assert f"study.yaml: analysis.{key}" in text and repr(value) in text and words in text
