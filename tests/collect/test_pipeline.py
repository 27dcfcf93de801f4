"""Collection over case folders made by the real layers below it: rendered by studyflow.render,
each step run by studyflow.workflow.runstep (as the Snakemake rules run it). The solver is a small
Python script written for the test; its known answer is cd = 1/Re (chosen, not physical)."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import yaml

from studyflow.collect import collect_study
from studyflow.design import build_design
from studyflow.render import render_study
from studyflow.spec import load_study

SOLVER = """\
import json, sys
Re = {{ Re }}
if Re == 300:
    sys.exit(3)
for i in range(1, 4):
    print(f"iter {i} res={10.0 ** (-3 * i):.2e}")
json.dump({"drag": {"cd": 1.0 / Re}}, open("metrics.json", "w"))
"""


def test_rendered_and_run_cases_are_collected(tmp_path: Path) -> None:
    root = tmp_path / "plate"
    (root / "template").mkdir(parents=True)
    (root / "template" / "solve.py").write_text(SOLVER)
    (root / "study.yaml").write_text(yaml.safe_dump({
        "title": "Invented plate drag study", "template": "template",
        "constants": {"python": sys.executable},
        "parameters": [{"kind": "product", "values": {"Re": [100, 200, 300, 400]}}],
        "steps": [{"name": "solve", "run": ["{{ python }}", "solve.py"], "reads": ["solve.py"],
                   "writes": ["metrics.json"]}],
        "quantities": {"cd": {"from": "json", "file": "metrics.json", "key": "drag.cd"},
                       "res": {"from": "log", "file": "logs/solve.log", "pattern": r"res=(\S+)", "match": "all"}},
        "iteration": {"residuals": ["res"], "tolerance": 1e-8},
    }))
    study = load_study(root / "study.yaml")
    design = build_design(study)
    render_study(study, design)
    by_re = {c.params["Re"]: c.id for c in design.cases}
    for re_ in (100, 200, 300):
        subprocess.run([sys.executable, "-m", "studyflow.workflow.runstep", str(study.cases_dir / by_re[re_]), "solve"],
                       check=False, capture_output=True, timeout=60)
    # Re = 400: an interrupted run left a half-written output and no done marker.
    (study.cases_dir / by_re[400] / "metrics.json").write_text('{"drag": {"c')

    t = collect_study(study)
    cases = t.cases.set_index("case")
    assert cases.loc[by_re[100], "status"] == "done" and cases.loc[by_re[200], "status"] == "done"
    assert cases.loc[by_re[300], "status"] == "failed" and "exit code 3" in cases.loc[by_re[300], "reason"]
    assert cases.loc[by_re[400], "status"] == "pending"
    cd = t.results[t.results.quantity == "cd"].set_index("case").value
    assert cd[by_re[100]] == 1.0 / 100 and cd[by_re[200]] == 1.0 / 200  # the solver's known answer
    assert cases.loc[by_re[100], "converged"]  # 1e-9 <= 1e-8
    assert cases.loc[by_re[100], "iterations"] == 3
    assert not (study.cases_dir / by_re[400] / ".studyflow" / "record.json").exists()
    rec = json.loads((study.cases_dir / by_re[200] / ".studyflow" / "record.json").read_text())
    assert rec["quantities"]["cd"]["values"] == [0.005]
