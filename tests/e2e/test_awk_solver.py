"""From templates to the results table with a solver that is not Python: an awk program.

The "solver" integrates A*sin(x) over [0, pi] with the composite trapezoid rule on N cells and
prints the result as JSON and in its log; a shell post-processing step computes the error
against the exact integral 2A. Known answers:

* exact integral: int_0^pi A sin x dx = 2A (analytic);
* trapezoid value: T(N) = A (pi/N) sum_{k=1}^{N-1} sin(k pi/N) = A (pi/N) cot(pi/(2N)), from the
  closed form of the sum of sines sum_{k=1}^{N-1} sin(k pi/N) = cot(pi/(2N)) (common practice,
  e.g. the Lagrange trigonometric identity);
* the trapezoid rule is second order: the error ratio on halving h tends to 4 (common practice).
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from studyflow import api

SOLVER = r"""# trapezoid rule for A*sin(x) on [0, pi] with n cells
BEGIN {
  pi = atan2(0, -1); h = pi / n; s = 0
  for (k = 1; k < n; k++) s += sin(k * h)
  t = A * h * s
  printf "{\"integral\": %.17g, \"cells\": %d}\n", t, n > "metrics.json"
  printf "iteration,change\n" > "history.csv"
  for (i = 1; i <= 3; i++) printf "%d,%.3g\n", i, 10 ^ (-3 * i) > "history.csv"
  printf "integral = %.17g\n", t
}
"""

STUDY = """\
title: Trapezoid integration of an invented load curve
template: tpl
constants: {program: awk}
parameters:
  - kind: product
    values: {A: [1.0, 2.5]}
mesh: {levels: 3, ratio: 2, counts: {n: 8}, extent: [3.141592653589793]}
steps:
  - name: solve
    run: "{{ program }} -v n={{ mesh.n }} -v A={{ A }} -f solver.awk"
    reads: [solver.awk]
    writes: [metrics.json, history.csv]
  - name: post
    run: [sh, post.sh]
    reads: [post.sh, metrics.json]
    writes: [summary.json]
quantities:
  integral: {from: json, file: metrics.json, key: integral}
  error: {from: json, file: summary.json, key: error}
  logged: {from: log, file: logs/solve.log, pattern: 'integral = (\\S+)'}
  change: {from: csv, file: history.csv, column: change, series: true}
"""

POST = """\
awk -v A={{ A }} '{ if (match($0, /"integral": [^,]*/)) { v = substr($0, RSTART + 12, RLENGTH - 12) } }
  END { printf "{\\"error\\": %.17g}\\n", v - 2 * A }' metrics.json > summary.json
"""


def test_awk_solver_end_to_end(tmp_path: Path) -> None:
    root = tmp_path / "trapezoid"
    (root / "tpl").mkdir(parents=True)
    (root / "tpl/solver.awk").write_text(SOLVER)
    (root / "tpl/post.sh").write_text(POST)
    (root / "study.yaml").write_text(STUDY)

    out = api.run(root, cores=2, progress=False)
    assert out.exit_code == 0 and len(out.done) == 6
    res = out.tables.results
    scalars = res[res["kind"] == "scalar"]
    for _, row in scalars[scalars["quantity"] == "integral"].iterrows():
        n = 8 * 2 ** int(row["level"])
        exact_trapezoid = row["A"] * (math.pi / n) / math.tan(math.pi / (2 * n))
        assert abs(row["value"] - exact_trapezoid) < 1e-12 * row["A"]
        assert row["cells"] == n and abs(row["h"] - math.pi / n) < 1e-15
        assert row["status"] == "done"
    logged = scalars[scalars["quantity"] == "logged"].set_index("case")["value"]
    integral = scalars[scalars["quantity"] == "integral"].set_index("case")["value"]
    assert (logged == integral).all()  # the log and the JSON agree to the last digit printed
    err = scalars[(scalars["quantity"] == "error") & (scalars["A"] == 1.0)].sort_values("level")["value"].to_numpy()
    assert np.all(err < 0)  # the trapezoid rule underestimates a concave integrand
    ratios = err[:-1] / err[1:]
    assert np.all(np.abs(ratios - 4.0) < 0.02)  # second order: error ratio ~ 2^2 on halving h
    hist = out.tables.histories
    assert sorted(hist[hist["case"] == "A1--m0"]["value"]) == [1e-9, 1e-6, 1e-3]
