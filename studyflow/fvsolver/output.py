"""Files a case writes: residual history and monitored metrics (CSV), fields (.vtu through
meshio), metrics (JSON).

Each file is written to a temporary name and renamed, so a reader never sees half a file.
"""

from __future__ import annotations

import csv
import json
import math
import os
from pathlib import Path
from typing import Any

import meshio
import numpy as np

from .cases import Problem
from .grid import Grid
from .newton import COLUMNS


def _replace(tmp: Path, path: Path) -> None:
    os.replace(tmp, path)


def write_history(path: Path, rows: list[tuple]) -> None:
    tmp = path.with_name(path.name + ".part")
    with open(tmp, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(COLUMNS)
        for r in rows:
            w.writerow([r[0]] + [f"{v:.6e}" if isinstance(v, float) else v for v in r[1:5]] + [r[5], f"{r[6]:.4f}"])
    _replace(tmp, path)


def write_monitors(path: Path, history: list[tuple], rows: list[dict[str, float]]) -> None:
    """One row per iteration of the final mesh: the iteration and each monitored metric (17
    significant digits: an iterative-error estimate differences neighbouring rows)."""
    tmp = path.with_name(path.name + ".part")
    names = list(rows[0]) if rows else []
    with open(tmp, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(["iteration", *names])
        for h, r in zip(history, rows):
            w.writerow([h[0]] + [repr(r[k]) if math.isfinite(r[k]) else "" for k in names])
    _replace(tmp, path)


def _clean(obj: Any) -> Any:
    """JSON has no NaN/inf: write them as null."""
    if isinstance(obj, float):
        return obj if math.isfinite(obj) else None
    if isinstance(obj, dict):
        return {k: _clean(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_clean(v) for v in obj]
    if isinstance(obj, np.generic):
        return _clean(obj.item())
    if isinstance(obj, np.ndarray):
        return _clean(obj.tolist())
    return obj


def write_json(path: Path, data: dict) -> None:
    tmp = path.with_name(path.name + ".part")
    tmp.write_text(json.dumps(_clean(data), indent=1) + "\n", encoding="utf-8")
    _replace(tmp, path)


def write_fields(path: Path, prob: Problem, u: np.ndarray, v: np.ndarray, p: np.ndarray,
                 shear: dict[str, dict[str, np.ndarray]]) -> None:
    """Quads with u, v, p at cell centres, plus line cells along the walls with wall_shear."""
    g: Grid = prob.grid
    X, Y = np.meshgrid(g.xf, g.yf, indexing="ij")
    pts = np.stack([X.ravel(), Y.ravel(), np.zeros(X.size)], axis=1)
    node = np.arange(X.size).reshape(X.shape)
    quads = np.stack([node[:-1, :-1].ravel(), node[1:, :-1].ravel(), node[1:, 1:].ravel(), node[:-1, 1:].ravel()],
                     axis=1)
    lines, tau = [], []
    for side, d in shear.items():
        k = d["index"]
        if side == "south":
            seg = np.stack([node[k, 0], node[k + 1, 0]], axis=1)
        elif side == "north":
            seg = np.stack([node[k, -1], node[k + 1, -1]], axis=1)
        elif side == "west":
            seg = np.stack([node[0, k], node[0, k + 1]], axis=1)
        else:
            seg = np.stack([node[-1, k], node[-1, k + 1]], axis=1)
        lines.append(seg)
        tau.append(d["tau"])
    uc = 0.5 * (u[1:] + u[:-1]).ravel()
    vc = 0.5 * (v[:, 1:] + v[:, :-1]).ravel()
    cells = [("quad", quads)]
    nq = len(quads)
    data = {"u": [uc], "v": [vc], "p": [p.ravel()], "wall_shear": [np.full(nq, np.nan)]}
    if lines:
        ln = np.concatenate(lines)
        cells.append(("line", ln))
        nan = np.full(len(ln), np.nan)
        for k in ("u", "v", "p"):
            data[k].append(nan)
        data["wall_shear"].append(np.concatenate(tau))
    tmp = path.with_name(path.name + ".part.vtu")
    meshio.write(str(tmp), meshio.Mesh(pts, cells, cell_data=data), file_format="vtu")
    _replace(tmp, path)
