"""Solver version probes and the environment record.

Version strings checked here are the first-line formats of ``--version`` that command-line
programs commonly print ("name X.Y.Z", "Name X.Y.Z, more"; common practice).
"""

from __future__ import annotations

import platform
import shutil
import stat
import time
from pathlib import Path

import pytest

from studyflow.bundle import environment as env


def _program(folder: Path, name: str, body: str) -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    p = folder / name
    p.write_text("#!/bin/sh\n" + body + "\n")
    p.chmod(p.stat().st_mode | stat.S_IXUSR)
    return p


@pytest.mark.parametrize("line, version", [
    ("toysolve 1.0.0 (demo build)", "1.0.0"),
    ("Some Awk 5.2.1, API 3.2", "5.2.1"),
    ("solver version 12.4-rc2", "12.4-rc2"),
    ("no number here", None),
])
def test_version_is_the_first_version_like_token(tmp_path: Path, monkeypatch, line: str, version) -> None:
    _program(tmp_path, "prog", f'echo "{line}"')
    monkeypatch.setenv("PATH", str(tmp_path))
    probe = env.probe_solver("prog")
    assert probe.output == line and probe.version == version and probe.error is None


def test_missing_failing_and_silent_programs(tmp_path: Path, monkeypatch) -> None:
    _program(tmp_path, "fails", 'echo "unknown option" >&2; exit 2')
    _program(tmp_path, "hangs", f"exec {shutil.which('sleep')} 30")
    monkeypatch.setenv("PATH", str(tmp_path))
    assert env.probe_solver("nothere").error == "not found"
    failing = env.probe_solver("fails")
    assert failing.version is None and failing.output == "unknown option" and "code 2" in failing.error
    t = time.monotonic()
    hanging = env.probe_solver("hangs", timeout=0.5)
    assert "no answer" in hanging.error and time.monotonic() - t < 10


def test_capture_and_compare_report_changed_solver(tmp_path: Path, monkeypatch) -> None:
    _program(tmp_path / "a", "prog", 'echo "prog 1.2"')
    monkeypatch.setenv("PATH", str(tmp_path / "a"))
    record = env.capture(["prog"])
    assert record["python"]["version"] == platform.python_version()
    assert record["key_packages"]["numpy"] == env.version_of("numpy")
    _program(tmp_path / "b", "prog", 'echo "prog 1.3"')
    monkeypatch.setenv("PATH", str(tmp_path / "b"))
    notes = env.compare(record, {"prog": env.probe_solver("prog")})
    assert notes == [{"what": "solver version", "name": "prog", "packed": "1.2", "now": "1.3", "error_now": None}]
