"""The packaged rules work through plain Snakemake from the repository root, without studyflow's driver."""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

from studyflow import api
from studyflow.spec import load_study
from studyflow.workflow.driver import EngineOptions, snakemake_argv
from studyflow.workflow.rules_support import group_components, group_for

from sfstudies import executions, table_study

REPO = Path(__file__).resolve().parents[2]


def test_plain_snakemake_from_the_repository_root(tmp_path: Path) -> None:
    root = table_study(tmp_path / "s", points=2, levels=2)
    rel = os.path.relpath(root, REPO)
    env = {**os.environ, "PYTHONPATH": str(REPO)}
    proc = subprocess.run([sys.executable, "-m", "snakemake", "--cores", "2", "--config", f"study={rel}", "-q"],
                          cwd=REPO, env=env, capture_output=True, text=True, timeout=300)
    assert proc.returncode == 0, proc.stdout + proc.stderr
    assert sorted(executions(root)) == ["p00--m0", "p00--m1", "p01--m0", "p01--m1"]
    # The markers written under plain Snakemake are the ones studyflow's plan reads.
    assert api.plan(root).cases_to_run() == []


def test_driver_options_and_batch_hook(tmp_path: Path) -> None:
    root = table_study(tmp_path / "s", points=1, levels=1, extra="cluster: {batch: 20}\n")
    study = load_study(root)
    argv = snakemake_argv(study, ["cases/p00--m0/.studyflow/solve.done"], EngineOptions(cores=3, extra_args=["-p"]))
    for flag in ("--nolock", "--rerun-incomplete", "--keep-going", "--scheduler", "--max-jobs-per-timespan"):
        assert flag in argv
    assert argv[argv.index("--cores") + 1] == "3" and argv[-1] == "-p"
    assert argv[2] == "cases/p00--m0/.studyflow/solve.done"  # explicit targets, before any option
    assert group_for(study, study.steps[0]) == "sf_batch"
    assert group_components(study) == ["--group-components", "sf_batch=20"]


def test_retries_rerun_a_failed_step(tmp_path: Path) -> None:
    root = table_study(tmp_path / "s", points=1, levels=1, extra="retries: 1\n")
    step = root / "tpl" / "step.sh"
    # Fails on its first attempt only (leaves a flag behind), as a flaky licence server might.
    step.write_text('[ -f tried ] || { touch tried; echo attempt >> ../../runs.log; exit 1; }\n' + step.read_text())
    out = api.run(root, cores=1, progress=False)
    assert out.exit_code == 0
    assert executions(root) == ["attempt", "p00--m0"]
