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
    enginelaunch.scan_once(hide_executors=True)
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


def test_module_scan_is_done_once_and_gives_the_same_modules(monkeypatch: pytest.MonkeyPatch) -> None:
    calls = []
    original = pkgutil.iter_modules

    def counting(path=None, prefix=""):
        calls.append(path)
        return original(path, prefix)

    monkeypatch.setattr(pkgutil, "iter_modules", counting)
    enginelaunch.scan_once(hide_executors=False)
    first = [m.name for m in pkgutil.iter_modules()]
    second = [m.name for m in pkgutil.iter_modules()]
    assert first == second == [m.name for m in original()]
    assert calls == [None]


def test_early_launcher_waits_for_targets_and_ends_quietly_without(tmp_path) -> None:
    (tmp_path / "Snakefile").write_text('rule a:\n    output: "a.txt"\n    shell: "echo 1 > {output}"\n')
    argv = [sys.executable, str(LAUNCHER), enginelaunch.TARGETS_ON_STDIN, "--cores", "1", "--nolock"]
    nothing = subprocess.run(argv, cwd=tmp_path, input="", capture_output=True, text=True, timeout=120)
    assert nothing.returncode == 0 and not (tmp_path / "a.txt").exists()
    some = subprocess.run(argv, cwd=tmp_path, input='["a.txt"]', capture_output=True, text=True, timeout=120)
    assert some.returncode == 0, some.stderr
    assert (tmp_path / "a.txt").read_text() == "1\n"


def test_timers_become_daemons(monkeypatch: pytest.MonkeyPatch) -> None:
    import threading

    monkeypatch.setattr(threading, "Timer", threading.Timer)  # restored after the test
    enginelaunch.timers_do_not_hold_exit()
    t = threading.Timer(60.0, lambda: None)
    assert t.daemon
