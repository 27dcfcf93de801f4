"""Iterative convergence from histories: residual drop, iterative-error estimate, the 1 % rule."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from studyflow.analysis.iterative import iterative_negligible, monitor_error, residual_summary


def _hist(case, quantity, values):
    n = len(values)
    return pd.DataFrame({"study": "s", "case": case, "point": case.split("--")[0], "level": 0,
                         "quantity": quantity, "iteration": np.arange(1, n + 1), "value": values})


def test_residual_drop_in_orders_of_magnitude():
    # r_k = 10^(-k/10), k = 0..100: exactly 10 orders of magnitude (analytic).
    h = pd.concat([_hist("a--m0", "res", 10.0 ** (-np.arange(101) / 10)),
                   _hist("b--m0", "res", np.full(50, 0.5))])
    out = residual_summary(h, ["res"]).set_index("case")
    assert out.loc["a--m0", "drop_orders"] == pytest.approx(10.0, rel=1e-12)
    assert out.loc["a--m0", "final_normalised"] == pytest.approx(1e-10, rel=1e-9)
    assert out.loc["a--m0", "iterations"] == 101
    assert out.loc["b--m0", "drop_orders"] == pytest.approx(0.0, abs=1e-15)


def test_drop_is_measured_from_the_peak_when_the_first_value_is_zero():
    # A uniform start field satisfies continuity exactly, so a mass imbalance can start at 0,
    # rise to 1e-2 and fall to 1e-11: 9 orders from the peak (arithmetic), not an infinite rise.
    h = _hist("a--m0", "mass", np.array([0.0, 1e-2, 1e-5, 1e-11]))
    out = residual_summary(h, ["mass"])
    assert out["peak"].iat[0] == 1e-2
    assert out["drop_orders"].iat[0] == pytest.approx(9.0, rel=1e-12)
    assert np.isfinite(out["final_normalised"].iat[0])


def test_iteration_order_not_row_order():
    h = _hist("a--m0", "res", 10.0 ** (-np.arange(11.0))).iloc[::-1]  # rows reversed
    out = residual_summary(h, ["res"])
    assert out["drop_orders"].iat[0] == pytest.approx(10.0, rel=1e-12)


def test_monitor_error_is_half_range_of_last_window():
    # 200 iterations -> window max(5, 10 %) = 20; a spike before the window must not count.
    v = np.full(200, 3.0)
    v[-20:] += 1e-4 * (-1.0) ** np.arange(20)  # +-1e-4 in the window: half range 1e-4
    v[100] = 100.0
    short = np.r_[np.full(25, 50.0), 1.0 + 1e-6 * np.arange(5)]  # 30 iterations -> window of 5
    out = monitor_error(pd.concat([_hist("a--m0", "cd", v), _hist("b--m0", "cd", short)])).set_index("case")
    assert out.loc["a--m0", "iterative_error"] == pytest.approx(1e-4, rel=1e-9)
    assert out.loc["a--m0", "window"] == 20
    assert out.loc["b--m0", "iterative_error"] == pytest.approx(2e-6, rel=1e-6)
    assert out.loc["b--m0", "window"] == 5


def test_one_percent_rule():
    # Rule: negligible when under 1 % of U (common practice); unknown -> None.
    ok = iterative_negligible([1e-5, 2e-2, np.nan, 0.0], [1e-2, 1.0, 1.0, 0.0])
    assert list(ok) == [True, False, None, True]


def test_residual_at_roundoff_throughout_is_marked_not_ranked():
    # Newton on (u, v, p) meets continuity to machine precision from its first step: the mass
    # imbalance sits near 1e-15 while momentum falls 1e-1 -> 1e-11 (arithmetic: 10 orders).
    h = pd.concat([_hist("a--m0", "mass", np.array([0.0, 2.1e-15, 2.8e-15, 2.0e-15])),
                   _hist("a--m0", "xmom", np.array([1e-1, 1e-4, 1e-8, 1e-11])),
                   _hist("b--m0", "mass", np.array([4e-3, 1e-8, 1e-14])),
                   _hist("b--m0", "xmom", np.array([5e-3, 1e-7, 1e-11]))])
    out = residual_summary(h, ["mass", "xmom"]).set_index(["case", "quantity"])
    assert bool(out.loc[("a--m0", "mass"), "roundoff"]) is True
    assert bool(out.loc[("a--m0", "xmom"), "roundoff"]) is False
    assert not out.loc["b--m0", "roundoff"].any()  # a mass imbalance that really fell is ranked

    from studyflow.analysis.text import iterative_text
    from studyflow.report.tables import residual_summary as per_case

    text = iterative_text(residual_summary(h, ["mass", "xmom"]))
    assert text.splitlines()[-1].split()[:4] == ["a--m0", "mass", "4", "at"]  # listed last, as round-off
    cases = per_case(h, ["mass", "xmom"]).set_index("case")
    assert cases.loc["a--m0", "residual drop [decades]"] == pytest.approx(10.0, rel=1e-12)  # momentum's
