"""Helpers of the bundle tests (fixtures are in conftest.py): a small invented study with a
shell/awk "solver" of known answer.

The toy solver computes phi = k * (1 + 0.5 h^2) with h = 1/n (a quantity converging at second
order to k, an invented demo with an analytic form) and writes a residual history that decays
by a factor of ten per iteration. It answers ``--version`` like a real program, so tests can
swap in a "new release" with the same numerics.
"""

from __future__ import annotations

import os
import stat
from dataclasses import dataclass
from pathlib import Path

import pytest

SOLVER = """#!/bin/sh
if [ "$1" = "--version" ]; then echo "toysolve {version} (demo build)"; exit 0; fi
n=$(awk -F' = ' '$1=="n"{{print $2}}' "$1")
k=$(awk -F' = ' '$1=="k"{{print $2}}' "$1")
awk -v n="$n" -v k="$k" 'BEGIN {{
  h = 1.0 / n; phi = k * (1 + 0.5 * h * h) * {scale}
  printf "{{\\"drag\\": {{\\"cd\\": %.17g}}}}\\n", phi > "metrics.json"
  print "iteration,res" > "history.csv"
  for (i = 0; i < 5; i++) printf "%d,%.17g\\n", i, 10 ^ (-i) > "history.csv"
  printf "<VTKFile n=\\"%d\\"/>\\n", n > "fields.vtu"
  printf "toysolve: n = %d, k = %s, phi = %.17g\\n", n, k, phi
}}'
"""

STUDY = """title: Toy drag of an invented strut (bundle test)
template: ../../templates/toy
parameters:
  - kind: product
    values: {k: [1.0, 2.5]}
mesh:
  levels: 3
  ratio: 2
  counts: {n: 4}
  extent: [1.0]
steps:
  - name: solve
    run: "toysolve case.txt"
    reads: [case.txt]
    writes: [metrics.json, history.csv, fields.vtu]
quantities:
  drag: {from: json, file: metrics.json, key: drag.cd}
  res: {from: csv, file: history.csv, column: res, series: true}
iteration: {residuals: [res], tolerance: 1.0e-3}
analysis: {formal_order: 2}
audit:
  rtol: 1.0e-9
  per_quantity: {res: {rtol: 1.0e-6}}
"""


@dataclass
class Toy:
    base: Path
    study_dir: Path
    template_dir: Path
    bin_dir: Path

    @property
    def study_file(self) -> Path:
        return self.study_dir / "study.yaml"


def write_solver(bin_dir: Path, version: str, scale: str = "1") -> Path:
    """The toy solver; ``scale`` multiplies its answer (a stand-in for a release that changed numbers)."""
    bin_dir.mkdir(parents=True, exist_ok=True)
    path = bin_dir / "toysolve"
    path.write_text(SOLVER.format(version=version, scale=scale))
    path.chmod(path.stat().st_mode | stat.S_IXUSR | stat.S_IXGRP | stat.S_IXOTH)
    return path


def make_toy(base: Path, version: str = "1.0.0") -> Toy:
    study_dir = base / "studies" / "toy"
    template_dir = base / "templates" / "toy"
    study_dir.mkdir(parents=True)
    template_dir.mkdir(parents=True)
    (study_dir / "study.yaml").write_text(STUDY)
    (template_dir / "case.txt").write_text("# toy case {{ case }}\nn = {{ mesh.n }}\nk = {{ k }}\n")
    return Toy(base, study_dir, template_dir, write_solver(base / "bin", version).parent)


@pytest.fixture
def toy(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Toy:
    t = make_toy(tmp_path / "work")
    monkeypatch.setenv("PATH", f"{t.bin_dir}{os.pathsep}{os.environ.get('PATH', '')}")
    return t


def run_toy(toy: Toy) -> None:
    """Render, run, collect and assess the toy study with the project's own layers: each step by
    the workflow's step runner (what every workflow job calls; the engine itself is exercised by
    the plate demo and by the audit's full re-run), then collection and analysis."""
    import subprocess
    import sys

    from studyflow.analysis import assess_study
    from studyflow.collect import collect_study, write_tables
    from studyflow.design import build_design
    from studyflow.render import render_study
    from studyflow.spec import load_study

    study = load_study(toy.study_file)
    design = build_design(study)
    render_study(study, design)
    for case in design.cases:
        for step in study.step_names():
            subprocess.run([sys.executable, "-m", "studyflow.workflow.runstep", str(study.cases_dir / case.id),
                            step], check=True)
    write_tables(study.root, collect_study(study))
    assess_study(study.file, write=True)


@dataclass
class Packed:
    toy: Toy
    archive: Path


@pytest.fixture(scope="session")
def packed_toy(tmp_path_factory: pytest.TempPathFactory) -> Packed:
    """The toy study run once and packed; tests unpack their own copy of the archive."""
    base = tmp_path_factory.mktemp("packed")
    t = make_toy(base / "work")
    with pytest.MonkeyPatch.context() as mp:
        mp.setenv("PATH", f"{t.bin_dir}{os.pathsep}{os.environ.get('PATH', '')}")
        mp.setenv("SOURCE_DATE_EPOCH", "1767225600")
        run_toy(t)
        from studyflow.bundle import pack

        archive = pack(t.study_dir, base / "toy-bundle.tar.gz").archive
    return Packed(t, archive)


def use_solver(mp: pytest.MonkeyPatch, folder: Path, version: str, scale: str = "1") -> None:
    """Put a toy solver of this version first on PATH (the reviewer's machine)."""
    write_solver(folder, version, scale)
    mp.setenv("PATH", f"{folder}{os.pathsep}{os.environ.get('PATH', '')}")
