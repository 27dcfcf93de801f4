"""Case ids: readable, filesystem-safe, unique and the same on every machine."""

from __future__ import annotations

import re
import subprocess
import sys
from pathlib import Path

from studyflow.design import build_design
from studyflow.design.ids import format_value
from studyflow.spec.model import Study

SAFE = re.compile(r"^[A-Za-z0-9][A-Za-z0-9._-]*--m[0-9]+$")


def study(parameters: list[dict], levels: int = 2) -> Study:
    return Study.model_validate({"template": "t", "parameters": parameters,
                                 "mesh": {"levels": levels, "counts": {"nx": 4}},
                                 "steps": [{"name": "s", "run": ["true"]}]})


def test_readable_ids() -> None:
    d = build_design(study([{"kind": "product", "values": {"Re": [1.0e4, 2.5e-5], "tilt": [-2, 0]}},
                            {"kind": "table", "points": [{"id": "nominal", "Re": 3.0e4, "tilt": 1}]}]))
    assert [c.id for c in d.cases] == [
        "Re10000_tilt-2--m0", "Re10000_tilt-2--m1", "Re10000_tilt0--m0", "Re10000_tilt0--m1",
        "Re2.5e-5_tilt-2--m0", "Re2.5e-5_tilt-2--m1", "Re2.5e-5_tilt0--m0", "Re2.5e-5_tilt0--m1",
        "nominal--m0", "nominal--m1"]


def test_value_formatting() -> None:
    assert [format_value(v) for v in (1e6, 0.1, 1 / 3, True, "water 20 C", 7)] == \
        ["1e6", "0.1", "0.333333", "true", "water-20-C", "7"]


def test_collisions_and_long_ids_get_a_hash_suffix() -> None:
    d = build_design(study([{"kind": "product", "values": {"x": [1.0000001, 1.0000002],
                                                           "a_rather_long_parameter_name": [123456.789],
                                                           "another_long_parameter_name": ["abc"]}}], 1))
    ids = [c.id for c in d.cases]
    assert len(set(ids)) == 2
    assert all(SAFE.match(i) and len(i) <= 84 for i in ids)
    assert all(re.search(r"_h[0-9a-f]{6}--m0$", i) for i in ids)


LHS_STUDY = {"template": "t", "parameters": [{"kind": "lhs", "samples": 5, "seed": 2, "ranges": {
    "a": {"low": 1, "high": 9}, "b": {"low": 0.1, "high": 10, "scale": "log"}}}],
    "mesh": {"levels": 2, "counts": {"nx": 4}}, "steps": [{"name": "s", "run": ["true"]}]}


def test_ids_identical_in_a_fresh_interpreter() -> None:
    # The same study in another process with another hash seed gives the same ids (nothing
    # depends on set or dict-of-hash order).
    code = ("import sys, json; from studyflow.design import build_design; from studyflow.spec.model import Study; "
            "print(' '.join(c.id for c in build_design(Study.model_validate(json.loads(sys.argv[1]))).cases))")
    import json

    out = subprocess.run([sys.executable, "-c", code, json.dumps(LHS_STUDY)], capture_output=True, text=True,
                         check=True, env={"PYTHONHASHSEED": "12345",
                                          "PYTHONPATH": str(Path(__file__).resolve().parents[2])}).stdout.split()
    here = [c.id for c in build_design(Study.model_validate(LHS_STUDY)).cases]
    assert out == here
    assert all(SAFE.match(i) for i in here)
