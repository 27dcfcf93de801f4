"""A small study on disk with case folders written by hand in the layout of DEVELOPERS.md
(case.json as rendering writes it, status and done markers as the step runner writes them)."""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

import yaml

from studyflow.design import build_design
from studyflow.spec import load_study

STUDY = {
    "title": "Collector test: an invented channel study",
    "template": "template",
    "parameters": [{"kind": "product", "values": {"Re": [100, 200]}}],
    "mesh": {"levels": 3, "ratio": 2, "counts": {"nx": 8, "ny": 4}, "extent": [2.0, 1.0]},
    "steps": [{"name": "solve", "run": ["true"], "writes": ["metrics.json"]},
              {"name": "post", "run": ["true"], "writes": ["wall.csv"]}],
    "quantities": {
        "drag": {"from": "json", "file": "metrics.json", "key": "drag.cd", "unit": "N"},
        "cf": {"from": "csv", "file": "wall.csv", "column": "cf", "coord_column": "x"},
        "res": {"from": "log", "file": "logs/solve.log", "pattern": r"res=(\S+)", "match": "all"},
    },
    "iteration": {"residuals": ["res"], "tolerance": 1.0e-6},
}


def make_study(root: Path, **changes: Any):
    """Write study.yaml (with ``changes`` merged at the top level) and return the loaded Study."""
    root.mkdir(parents=True, exist_ok=True)
    (root / "template").mkdir(exist_ok=True)
    (root / "template" / "case.toml").write_text("Re = {{ Re }}\n")
    data = {**STUDY, **changes}
    (root / "study.yaml").write_text(yaml.safe_dump(data, sort_keys=False))
    return load_study(root / "study.yaml")


def write_case(study, case, *, steps=("solve", "post"), failed: dict[str, str] | None = None,
               outputs: dict[str, str] | None = None, wall: float = 1.5) -> Path:
    """A case folder: case.json, the given steps ok (with done markers) or failed, and outputs."""
    folder = study.root / "cases" / case.id
    state = folder / ".studyflow"
    state.mkdir(parents=True, exist_ok=True)
    m = case.mesh
    (state / "case.json").write_text(json.dumps({
        "study": study.name, "case": case.id, "point": case.point.id, "level": m.level, "levels": m.levels,
        "params": dict(case.params), "constants": {},
        "mesh": {"level": m.level, "levels": m.levels, "h": m.h, "ratio": m.ratio, "cells": m.cells,
                 "sizes": dict(m.sizes)}}))
    for step in steps:
        ok = not failed or step not in failed
        (state / f"{step}.status.json").write_text(json.dumps({
            "case": case.id, "step": step, "state": "ok" if ok else "failed",
            "reason": None if ok else failed[step], "exit_code": 0 if ok else 3, "wall_s": wall}))
        if ok:
            (state / f"{step}.done").write_text(json.dumps({"signature": "x"}))
    for rel, text in (outputs or {}).items():
        p = folder / rel
        p.parent.mkdir(parents=True, exist_ok=True)
        p.write_text(text)
    return folder


def good_outputs(cd: float, residuals=(1e-2, 1e-5, 1e-7)) -> dict[str, str]:
    log = "".join(f"it {i} res={r:.3e}\n" for i, r in enumerate(residuals, start=1))
    return {"metrics.json": json.dumps({"drag": {"cd": cd}}),
            "wall.csv": "x,cf\n0.0,0.010\n0.5,0.008\n1.0,0.007\n",
            "logs/solve.log": log}


def cases_of(study):
    return list(build_design(study).cases)
