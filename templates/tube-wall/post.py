"""Post-processing step: heat flow per unit length, mesh statistics and solver residual to heat.json.

Reads solution.npz from the solve step. The heat flow per unit length of tube is the sum of the face
flows through the inner circle (what the hot side gives) and, as a conservation check, through the outer
circle. The residual history goes to residuals.csv, one row per solver sweep.
"""

from __future__ import annotations

import json
import math
import os
import sys

import numpy as np

INPUT = "solution.npz"
OUTPUT = "heat.json"
HISTORY = "residuals.csv"


def write_atomically(path: str, text: str) -> None:
    # Collectors may read while a rerun writes: they must see the old file or the new one.
    tmp = f".{path}.tmp"
    with open(tmp, "w", encoding="utf-8", newline="") as fh:
        fh.write(text)
    os.replace(tmp, path)


def main() -> int:
    data = np.load(INPUT)
    inner = float(np.sum(data["inner_face_flow"]))
    outer = float(np.sum(data["outer_face_flow"]))
    residuals = [float(r) for r in data["residuals"]]
    # The first sweep starts from the uniform guess, so its residual is the natural scale.
    initial = residuals[0] if residuals[0] > 0 else 1.0
    summary = {
        "heat_flow": {
            "per_length": inner,
            "inner": inner,
            "outer": outer,
            "imbalance": (inner - outer) / inner if inner else math.nan,
        },
        "mesh": {
            "cells": int(data["cell_area"].size),
            "area": float(np.sum(data["cell_area"])),
            "inner_perimeter": float(np.sum(data["inner_face_length"])),
            "outer_perimeter": float(np.sum(data["outer_face_length"])),
        },
        "solver": {
            "residual": residuals[-1],
            "residual_relative": residuals[-1] / initial,
            "sweeps": len(residuals),
        },
    }
    write_atomically(OUTPUT, json.dumps(summary, indent=2) + "\n")
    lines = [["sweep", "residual", "residual_relative"]]
    lines += [[str(i + 1), repr(r), repr(r / initial)] for i, r in enumerate(residuals)]
    write_atomically(HISTORY, "".join(",".join(row) + "\n" for row in lines))
    print(
        f"post.py: heat flow {inner:.6g} W/m (outer {outer:.6g}), {summary['mesh']['cells']} cells, "
        f"residual {residuals[-1]:.3e}"
    )
    return 0


if __name__ == "__main__":
    sys.exit(main())
