"""Timing of the analysis layer: many groups assessed at once. Prints a table; not part of the suite.

Targets: 100,000 groups x 3 levels in under 2 s; 10,000 groups x 5 levels by least squares in
under 10 s. Data are invented power laws with noise (phi0 + C h^p + e), seeded.

    python benchmarks/bench_analysis.py [--scale 0.1]
"""

from __future__ import annotations

import argparse
import time

import numpy as np
import pandas as pd

from studyflow.analysis import assess, least_squares_uncertainty, three_level


def _levels(n_groups: int, n_levels: int, seed: int) -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng(seed)
    ratio = rng.uniform(1.3, 2.0, (n_groups, 1))
    h = 0.02 * ratio ** np.arange(n_levels)[None, :]
    p = rng.uniform(0.7, 2.5, (n_groups, 1))
    c = rng.uniform(-2.0, 2.0, (n_groups, 1))
    phi = 1.0 + c * h**p + rng.normal(0.0, 1e-5, (n_groups, n_levels))
    return h, phi


def _tidy(h: np.ndarray, phi: np.ndarray) -> pd.DataFrame:
    g, n = h.shape
    point = np.repeat(np.arange(g), n).astype(str)
    level = np.tile(np.arange(n)[::-1], g)
    return pd.DataFrame({
        "study": "bench", "case": np.char.add(np.char.add(point, "--m"), level.astype(str)), "point": point,
        "level": level, "cells": (1.0 / h.ravel()) ** 2, "h": h.ravel(), "quantity": "q", "kind": "scalar",
        "coord": np.nan, "value": phi.ravel(), "unit": "-", "status": "done", "converged": True, "reason": "",
    })


def _time(fn, repeat: int = 3) -> float:
    best = np.inf
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__)
    ap.add_argument("--scale", type=float, default=1.0, help="fraction of the target sizes (quick check)")
    args = ap.parse_args()
    n3, n5 = int(100_000 * args.scale), int(10_000 * args.scale)
    h3, phi3 = _levels(n3, 3, 1)
    h5, phi5 = _levels(n5, 5, 2)
    t3 = _tidy(h3, phi3)
    t5 = _tidy(h5, phi5)
    rows = [
        ("three_level (arrays)", n3, 3, _time(lambda: three_level(h3, phi3)), 2.0),
        ("assess (tidy table)", n3, 3, _time(lambda: assess(t3, None, 2.0), repeat=1), 2.0),
        ("least_squares_uncertainty (arrays)", n5, 5, _time(lambda: least_squares_uncertainty(h5, phi5)), 10.0),
        ("assess (tidy table, least squares)", n5, 5, _time(lambda: assess(t5, None, 2.0), repeat=1), 10.0),
    ]
    print(f"{'what':38s} {'groups':>8s} {'levels':>6s} {'seconds':>8s} {'target':>7s}  ok")
    for what, g, n, sec, target in rows:
        print(f"{what:38s} {g:8d} {n:6d} {sec:8.3f} {target * args.scale:7.2f}  {'yes' if sec < target * max(args.scale, 0.05) else 'NO'}")


if __name__ == "__main__":
    main()
