"""A small invented study folder written straight to disk, so report tests need no solver run.

Scenario (invented, for tests only): pressure drop ``dp`` across a louvred vent and the skin friction
``cf`` along its first louvre, for a few Reynolds numbers and louvre angles, on three meshes.

The values follow phi(h) = phi0 + C h^2 + D h^3, so the observed order from three meshes is near but
not exactly 2. The uncertainty table is computed here with the textbook three-mesh Richardson
extrapolation and GCI (Roache 1998; Celik et al. 2008, J. Fluids Eng. 130, 078001, eqs. 1-7), so the
report under test only displays numbers it did not make.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import meshio
import numpy as np
import pandas as pd

RATIO = 2.0
H0 = 0.1  # level-0 mesh size
SAFETY = 1.25  # Celik et al. (2008): Fs = 1.25 for three or more meshes


def point_id(re: float, angle: float) -> str:
    return f"Re{re:.4g}-ang{angle:g}".replace("+", "")


def dp_exact(re: float, angle: float) -> float:
    return 12.0 / math.sqrt(re / 1.0e4) * (1.0 + 0.05 * angle)


def richardson(f1: float, f2: float, f3: float, r: float) -> dict[str, float]:
    """Three-mesh observed order, extrapolated value and fine-grid GCI, f1 finest (Celik et al. 2008)."""
    e21, e32 = f2 - f1, f3 - f2
    p = math.log(abs(e32 / e21)) / math.log(r)
    ext = (r**p * f1 - f2) / (r**p - 1.0)
    ea = abs((f1 - f2) / f1)
    gci = SAFETY * ea / (r**p - 1.0)
    return {"order": p, "extrapolated": ext, "e_a": ea, "e_ext": abs((ext - f1) / ext), "gci_fine": gci,
            "gci_medium": SAFETY * abs(e32 / f2) / (r**p - 1.0), "R": e21 / e32}


def write_study(root: Path, res: list[float] = (1.0e4, 3.0e4, 1.0e5), angles: list[float] = (0.0, 4.0),
                levels: int = 3, iterations: int = 120, stations: int = 12, failed: bool = True,
                pending: bool = True, fields: str = "first", analysis: bool = True) -> Path:
    """Write the study; ``fields`` is "first" (VTU files for the first point only), "all" or "none"."""
    root.mkdir(parents=True, exist_ok=True)
    (root / "study.yaml").write_text(
        "title: Louvred vent, pressure drop and skin friction (synthetic)\n"
        "description: invented scenario for report tests; data for demonstration only\n"
        "template: tmpl\nconstants: {solver: studyflow-fv}\n"
        "parameters:\n  - kind: product\n    values: {Re: [1.0e4, 3.0e4, 1.0e5], angle: [0, 4]}\n"
        f"mesh: {{levels: {levels}, ratio: 2, counts: {{nx: 10, ny: 5}}, extent: [1.0, 0.5]}}\n"
        "steps:\n  - name: solve\n    run: studyflow-fv case.toml\n    reads: [case.toml]\n"
        "    writes: [metrics.json, history.csv, fields.vtu]\n"
        "quantities:\n"
        "  dp: {from: json, file: metrics.json, key: dp, unit: Pa}\n"
        "  cf: {from: json, file: metrics.json, key: cf.values, coord_key: cf.x}\n"
        "  mass: {from: csv, file: history.csv, column: mass, series: true}\n"
        "  momentum: {from: csv, file: history.csv, column: momentum, series: true}\n"
        "iteration: {residuals: [mass, momentum], tolerance: 1.0e-6}\n"
        "analysis: {formal_order: 2, safety_factor: 1.25}\n"
        "report:\n  references:\n    cf: {file: ref/blasius.csv, x: x, y: cf, label: Blasius, "
        f"point: {point_id(res[0], angles[0])}}}\n",
        encoding="utf-8")
    xs = np.linspace(0.1, 1.0, stations)
    (root / "ref").mkdir(exist_ok=True)
    # Blasius flat-plate skin friction cf = 0.664 / sqrt(Re_x) (Blasius 1908; from memory).
    pd.DataFrame({"x": xs, "cf": 0.664 / np.sqrt(res[0] * xs)}).to_csv(root / "ref" / "blasius.csv", index=False)
    res_rows, hist_rows, case_rows, unc_rows = [], [], [], []
    points = [(re, a) for re in res for a in angles]
    rng = np.random.default_rng(7)
    for pi, (re, angle) in enumerate(points):
        pid = point_id(re, angle)
        values = {}
        for level in range(levels):
            case = f"{pid}--m{level}"
            h = H0 / RATIO**level
            nx, ny = int(10 * RATIO**level), int(5 * RATIO**level)
            status, reason = "done", ""
            if failed and pi == len(points) - 1 and level == levels - 1:
                status, reason = "failed", "solve: exit code 3: linear solver diverged"
            if pending and pi == len(points) - 2 and level == levels - 1:
                status = "pending"
            folder = root / "cases" / case
            (folder / ".studyflow").mkdir(parents=True, exist_ok=True)
            (folder / ".studyflow" / "case.json").write_text(json.dumps({
                "case": case, "point": pid, "level": level, "params": {"Re": re, "angle": angle},
                "sizes": {"nx": nx, "ny": ny}, "h": h}), encoding="utf-8")
            wall = 2.0 * 4**level * (1 + 0.1 * pi)
            if status != "pending":
                # as the step runner writes them (DEVELOPERS.md, "Case folders"): the status, then for
                # a step that ended well its done marker
                (folder / ".studyflow" / "solve.status.json").write_text(json.dumps({
                    "state": "ok" if status == "done" else "failed",
                    "reason": reason.split(": ", 1)[-1] if reason else None,
                    "exit_code": 0 if status == "done" else 3, "wall_s": wall, "host": f"node-{1 + level}",
                    "started": f"2026-03-0{1 + level}T10:00:00Z", "ended": f"2026-03-0{1 + level}T10:05:00Z"}),
                    encoding="utf-8")
                if status == "done":
                    mark_done(folder, "solve")
            case_rows.append({"case": case, "point": pid, "level": level, "status": status, "reason": reason,
                              "wall_time": wall if status != "pending" else np.nan})
            base = {"study": root.name, "case": case, "point": pid, "level": level, "Re": re, "angle": angle,
                    "cells": nx * ny, "h": h, "unit": "-", "status": status, "converged": status == "done",
                    "reason": reason}
            dp = dp_exact(re, angle) + 30.0 * h**2 + 40.0 * h**3
            cf = 0.664 / np.sqrt(re * xs) * (1.0 + 8.0 * h**2 + 5.0 * h**3)
            if status == "done":
                values[level] = (dp, cf)
                (folder / "metrics.json").write_text(json.dumps({"solver": {"name": "studyflow-fv", "version": "0.1.0"},
                                                                 "dp": dp}), encoding="utf-8")
                drop = 5.0 + level + 0.5 * rng.random()
                it = np.arange(1, iterations + 1)
                for q, scale in (("mass", 1.0), ("momentum", 0.3)):
                    r = scale * 10.0 ** (-drop * it / iterations) * (1 + 0.2 * np.sin(it / 3.0))
                    hist_rows.append(pd.DataFrame({"study": root.name, "case": case, "point": pid, "level": level,
                                                   "quantity": q, "iteration": it, "value": r}))
                if fields == "all" or (fields == "first" and pi == 0):
                    write_vtu(folder / "fields.vtu", nx, ny)
            res_rows.append({**base, "quantity": "dp", "kind": "scalar", "coord": np.nan,
                             "value": dp if status == "done" else np.nan, "unit": "Pa"})
            for x, c in zip(xs, cf):
                res_rows.append({**base, "quantity": "cf", "kind": "profile", "coord": x,
                                 "value": c if status == "done" else np.nan})
        if analysis and len(values) == levels and levels >= 3:
            f1, f2, f3 = (values[levels - 1][0], values[levels - 2][0], values[levels - 3][0])
            unc_rows.append(_unc(pid, re, angle, "dp", np.nan, f1, f2, f3, levels))
            for j, x in enumerate(xs):
                unc_rows.append(_unc(pid, re, angle, "cf", x, values[levels - 1][1][j], values[levels - 2][1][j],
                                     values[levels - 3][1][j], levels))
    results = root / "results"
    results.mkdir(exist_ok=True)
    pd.DataFrame(res_rows).to_csv(results / "results.csv", index=False)
    pd.concat(hist_rows).to_csv(results / "histories.csv", index=False)
    pd.DataFrame(case_rows).to_csv(results / "cases.csv", index=False)
    if analysis:
        pd.DataFrame(unc_rows).to_csv(results / "uncertainty.csv", index=False)
    return root


def mark_done(folder: Path, step: str) -> None:
    """The done marker the step runner writes last, after checking the step's outputs."""
    (folder / ".studyflow" / f"{step}.done").write_text(json.dumps({
        "signature": "0" * 64, "finished": "2026-03-05T10:05:00Z"}), encoding="utf-8")


def _unc(pid, re, angle, quantity, coord, f1, f2, f3, levels) -> dict:
    r = richardson(f1, f2, f3, RATIO)
    big_u = r["gci_fine"] * abs(f1)
    return {"point": pid, "quantity": quantity, "coord": coord, "levels": levels,
            "h_fine": H0 / RATIO ** (levels - 1), "value_fine": f1, "order": r["order"],
            "extrapolated": r["extrapolated"], "e_a": r["e_a"], "e_ext": r["e_ext"], "gci_fine": r["gci_fine"],
            "gci_medium": r["gci_medium"], "asymptotic_ratio": r["gci_medium"] / (RATIO ** r["order"] * r["gci_fine"]),
            "convergence": "monotonic", "R": r["R"], "method": "GCI (Celik et al. 2008)", "U": big_u,
            "u_num": big_u / 2.0, "iterative_error": 1e-7, "iterative_ok": True,
            # the analysis layer's words: p within 25 % of the formal order 2 (studyflow.analysis.verdict)
            "verdict": "in the asymptotic range" if abs(r["order"] - 2.0) <= 0.5 else "observed order below formal",
            "reason": "",
            "Re": re, "angle": angle}


def write_vtu(path: Path, nx: int, ny: int) -> None:
    """A structured quad mesh of [0, 1] x [0, 0.5] with a smooth point field u and a cell field p."""
    x, y = np.meshgrid(np.linspace(0, 1, nx + 1), np.linspace(0, 0.5, ny + 1), indexing="xy")
    pts = np.c_[x.ravel(), y.ravel(), np.zeros(x.size)]
    idx = np.arange(pts.shape[0]).reshape(ny + 1, nx + 1)
    quads = np.c_[idx[:-1, :-1].ravel(), idx[:-1, 1:].ravel(), idx[1:, 1:].ravel(), idx[1:, :-1].ravel()]
    centres = pts[quads].mean(axis=1)
    u = np.sin(np.pi * pts[:, 0]) * np.cos(np.pi * pts[:, 1])
    p = centres[:, 0] ** 2 - centres[:, 1]
    meshio.write(str(path), meshio.Mesh(pts, [("quad", quads)], point_data={"u": u}, cell_data={"p": [p]}))
