"""The engine launcher hides executor plugins from local runs only (studyflow.workflow.enginelaunch)."""

from __future__ import annotations

import pkgutil
import subprocess
import sys

import pytest

from studyflow.workflow import enginelaunch
from studyflow.workflow.driver import LAUNCHER


@pytest.mark.parametrize("argv, wanted", [
    (["--cores", "2", "a.done"], False),
    (["--executor", "slurm"], True),
    (["-e", "slurm"], True),
    (["--executor=slurm"], True),
    (["--profile", "/tmp/p"], True),
    (["--workflow-profile=/tmp/p"], True),
])
def test_which_command_lines_need_plugins(argv: list[str], wanted: bool, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.delenv("STUDYFLOW_ALL_PLUGINS", raising=False)
    monkeypatch.delenv("SNAKEMAKE_PROFILE", raising=False)
    assert enginelaunch.wants_plugins(argv) is wanted


def test_environment_switch_keeps_every_plugin(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("STUDYFLOW_ALL_PLUGINS", "1")
    assert enginelaunch.wants_plugins(["--cores", "1"])


def test_filter_hides_only_executor_plugins(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(pkgutil, "iter_modules", pkgutil.iter_modules)  # restored after the test
    before = {m.name for m in pkgutil.iter_modules()}
    enginelaunch.hide_executor_plugins()
    after = {m.name for m in pkgutil.iter_modules()}
    assert not any(n.startswith(enginelaunch.PREFIX) for n in after)
    assert after == {n for n in before if not n.startswith(enginelaunch.PREFIX)}
    assert "snakemake" in after


def test_launcher_runs_snakemake_and_passes_its_exit_code(tmp_path) -> None:
    (tmp_path / "Snakefile").write_text('rule a:\n    output: "a.txt"\n    shell: "echo 1 > {output}"\n'
                                        'rule bad:\n    output: "b.txt"\n    shell: "exit 3"\n')
    ok = subprocess.run([sys.executable, str(LAUNCHER), "--cores", "1", "--nolock", "a.txt"], cwd=tmp_path,
                        capture_output=True, text=True, timeout=120)
    assert ok.returncode == 0, ok.stderr
    assert (tmp_path / "a.txt").read_text() == "1\n"
    bad = subprocess.run([sys.executable, str(LAUNCHER), "--cores", "1", "--nolock", "b.txt"], cwd=tmp_path,
                         capture_output=True, text=True, timeout=120)
    assert bad.returncode == 1
