"""Parameter blocks: product, zip, table, one-at-a-time, Latin hypercube and Sobol designs."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.stats import qmc

from studyflow.design import build_design
from studyflow.design.params import scale_samples, unit_samples
from studyflow.spec.model import Study


def study(parameters: list[dict], mesh: dict | None = None) -> Study:
    return Study.model_validate({"template": "t", "parameters": parameters, "mesh": mesh,
                                 "steps": [{"name": "s", "run": ["true"]}]})


def params_of(s: Study) -> list[dict]:
    return [p.params for p in build_design(s).points]


def test_product_is_full_factorial() -> None:
    pts = params_of(study([{"kind": "product", "values": {"a": [1, 2, 3], "b": ["x", "y"]}}]))
    assert pts == [{"a": a, "b": b} for a in (1, 2, 3) for b in ("x", "y")]


def test_zip_takes_lists_together_and_blocks_concatenate() -> None:
    pts = params_of(study([{"kind": "zip", "values": {"a": [1, 2], "b": [10, 20]}},
                           {"kind": "table", "points": [{"id": "nominal", "a": 5, "b": 50}]}]))
    assert pts == [{"a": 1, "b": 10}, {"a": 2, "b": 20}, {"a": 5, "b": 50}]


def test_one_at_a_time_varies_each_around_base_and_drops_repeats() -> None:
    s = study([{"kind": "product", "values": {"a": [1], "b": [10]}},
               {"kind": "one-at-a-time", "base": {"a": 1, "b": 10}, "vary": {"a": [0, 2], "b": [20]}}])
    # The base point repeats the product's only point and is not run twice.
    assert params_of(s) == [{"a": 1, "b": 10}, {"a": 0, "b": 10}, {"a": 2, "b": 10}, {"a": 1, "b": 20}]


def test_lhs_matches_scipy_and_is_stratified() -> None:
    n = 10
    s = study([{"kind": "lhs", "samples": n, "seed": 7,
                "ranges": {"a": {"low": 0.0, "high": 2.0}, "b": {"low": 1.0, "high": 100.0, "scale": "log"}}}])
    pts = params_of(s)
    ref = qmc.LatinHypercube(d=2, rng=7).random(n)  # reference library: scipy.stats.qmc
    assert np.allclose([p["a"] for p in pts], 2.0 * ref[:, 0], rtol=0, atol=1e-12)
    assert np.allclose([p["b"] for p in pts], 10 ** (2.0 * ref[:, 1]), rtol=1e-12)
    # Latin hypercube property (McKay, Beckman & Conover 1979): one sample in each of the n strata
    # of every variable; for the log-scaled one, strata are equal in log10(b).
    for values in ([p["a"] / 2.0 for p in pts], [math.log10(p["b"]) / 2.0 for p in pts]):
        assert sorted(int(v * n) for v in values) == list(range(n))


def test_sobol_matches_scipy_and_seed_reproduces() -> None:
    u = unit_samples("sobol", 8, 3, seed=3)
    assert np.array_equal(u, qmc.Sobol(d=3, scramble=True, rng=3).random(8))
    assert np.array_equal(u, unit_samples("sobol", 8, 3, seed=3))
    assert not np.array_equal(u, unit_samples("sobol", 8, 3, seed=4))
    # A scrambled Sobol set of 2^m points is balanced: each half of [0,1) holds 2^(m-1) of them
    # (the (t, m, s)-net property, Sobol 1967 / Owen 1995).
    assert ((u[:, 0] < 0.5).sum(), (u[:, 0] >= 0.5).sum()) == (4, 4)


def test_log_scaling_endpoints() -> None:
    out = scale_samples(np.array([0.0, 0.5, 1.0]), 1.0e3, 1.0e5, "log")
    assert np.allclose(out, [1.0e3, 1.0e4, 1.0e5])  # geometric midpoint of 1e3 and 1e5 is 1e4


@pytest.mark.parametrize("kind", ["lhs", "sobol"])
def test_sampled_points_stay_in_range(kind: str) -> None:
    s = study([{"kind": kind, "samples": 16, "seed": 1, "ranges": {"x": {"low": -1.0, "high": 1.0}}}])
    xs = [p["x"] for p in params_of(s)]
    assert len(xs) == 16 and all(-1.0 <= x < 1.0 for x in xs)
