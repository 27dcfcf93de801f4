"""The environment a study was run and packed in: Python, packages, platform, solver versions.

Solver versions are asked of the program itself (``<command> --version``, no shell, short
timeout); a program that does not answer is recorded as such rather than guessed.
"""

from __future__ import annotations

import datetime as _dt
import importlib.metadata as md
import json
import os
import platform
import re
import shutil
import signal
import subprocess
import sys
import tempfile
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import studyflow

from .manifest import ENVIRONMENT_NAME

# the packages whose versions most affect numbers or case rendering; all others are kept too
KEY_PACKAGES = ("studyflow", "numpy", "scipy", "pandas", "pyarrow", "jinja2", "pydantic", "pyyaml",
                "snakemake", "meshio", "h5py")

_VERSION_RE = re.compile(r"\d+(?:\.\d+)+(?:[-+.]?[0-9A-Za-z]+)*")


def now_utc() -> str:
    """Pack time as ISO 8601 UTC; ``SOURCE_DATE_EPOCH`` (a common reproducible-builds convention)
    fixes it so two packs of the same study give the same bytes."""
    epoch = os.environ.get("SOURCE_DATE_EPOCH")
    if epoch and epoch.isdigit():
        moment = _dt.datetime.fromtimestamp(int(epoch), tz=_dt.UTC)
    else:
        moment = _dt.datetime.now(tz=_dt.UTC).replace(microsecond=0)
    return moment.isoformat().replace("+00:00", "Z")


def packages() -> dict[str, str]:
    """Installed distributions by normalised name (importlib.metadata)."""
    found: dict[str, str] = {}
    for dist in md.distributions():
        # the header lines only: the full e-mail parser of ``dist.metadata`` costs ~5 ms a package
        text = dist.read_text("METADATA") or dist.read_text("PKG-INFO") or ""
        name = version = None
        for line in text.splitlines():
            if not line.strip():
                break
            if line.startswith("Name:"):
                name = line[5:].strip()
            elif line.startswith("Version:"):
                version = line[8:].strip()
        if name and version:
            found.setdefault(re.sub(r"[-_.]+", "-", name).lower(), version)
    return dict(sorted(found.items()))


def version_of(name: str) -> str | None:
    try:
        return md.version(name)
    except md.PackageNotFoundError:
        return None


@dataclass(frozen=True)
class SolverVersion:
    command: str
    resolved: str | None  # full path found on PATH, or None
    output: str | None  # first non-empty line the program printed
    version: str | None  # the first version-like token in that line
    error: str | None

    def to_json(self) -> dict[str, Any]:
        return dict(self.__dict__)

    @property
    def shown(self) -> str | None:
        """What a version note compares: the version token, else the line printed."""
        return self.version or self.output

    @property
    def label(self) -> str:
        return self.shown or f"unknown ({self.error})"


def recorded_version(record: dict[str, Any] | None) -> str | None:
    """``SolverVersion.shown`` of a solver as ``environment.json`` recorded it."""
    return (record or {}).get("version") or (record or {}).get("output")


def probe_solver(command: str, cwd: str | None = None, timeout: float = 5.0) -> SolverVersion:
    """Run ``command --version`` (argument list, no shell) and keep the first line it prints."""
    resolved = shutil.which(command, path=os.environ.get("PATH")) if "/" not in command else (
        os.path.join(cwd, command) if cwd and not os.path.isabs(command) else command)
    if resolved is None or not os.path.exists(resolved):
        return SolverVersion(command, None, None, None, "not found")
    try:
        # run in an empty scratch folder: a program that ignores --version and starts work
        # must not write into the study
        with tempfile.TemporaryDirectory(prefix="studyflow-probe-") as scratch:
            proc = subprocess.Popen([resolved, "--version"], stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                                    stdin=subprocess.DEVNULL, cwd=scratch, start_new_session=True)
            try:
                out, err = proc.communicate(timeout=timeout)
            except subprocess.TimeoutExpired:
                # its own session: one signal stops the program and anything it started
                try:
                    os.killpg(proc.pid, signal.SIGKILL)
                except ProcessLookupError:
                    pass
                proc.wait()
                for pipe in (proc.stdout, proc.stderr):
                    if pipe is not None:
                        pipe.close()
                return SolverVersion(command, resolved, None, None, f"no answer to --version within {timeout:g} s")
    except OSError as exc:
        return SolverVersion(command, resolved, None, None, f"could not start: {exc.strerror or exc}")
    text = (out or b"").decode("utf-8", "replace") + "\n" + (err or b"").decode("utf-8", "replace")
    line = next((ln.strip() for ln in text.splitlines() if ln.strip()), None)
    if proc.returncode != 0:
        return SolverVersion(command, resolved, line, None, f"--version exited with code {proc.returncode}")
    match = _VERSION_RE.search(line or "")
    return SolverVersion(command, resolved, line, match.group(0) if match else None, None)


def capture(solver_commands: list[str] | dict[str, str | None], command_lines: list[Any] | None = None,
            run_dates: dict[str, str] | None = None) -> dict[str, Any]:
    """The environment record stored as ``environment.json`` in a bundle. ``solver_commands``:
    the programs the steps start, or a mapping of each to the case folder it runs in."""
    where = dict(solver_commands) if isinstance(solver_commands, dict) else dict.fromkeys(solver_commands)
    pkgs = packages()
    return {
        "studyflow_version": studyflow.__version__,
        "packed": now_utc(),
        "pack_command": list(sys.argv),
        "python": {
            "version": platform.python_version(),
            "implementation": platform.python_implementation(),
            "executable": sys.executable,
        },
        "platform": {
            "system": platform.system(),
            "release": platform.release(),
            "machine": platform.machine(),
            "platform": platform.platform(),
        },
        "key_packages": {k: pkgs.get(k) for k in KEY_PACKAGES},
        "packages": pkgs,
        # a command given as a relative path is found from the case folder it runs in
        "solvers": {c: probe_solver(c, cwd=where.get(c)).to_json() for c in sorted(where)},
        "command_lines": command_lines or [],
        "run_dates": run_dates or {},
    }


def read_record(root: Path) -> dict[str, Any]:
    """The bundle's ``environment.json`` as packed; empty when it is missing or unreadable (the
    integrity check reports a missing or altered file, so nothing is lost by reading on)."""
    try:
        data = json.loads((root / ENVIRONMENT_NAME).read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return {}
    return data if isinstance(data, dict) else {}


def compare(shipped: dict[str, Any], solvers_now: dict[str, SolverVersion]) -> list[dict[str, Any]]:
    """Differences between the packed environment and this one that may change numbers."""
    notes: list[dict[str, Any]] = []
    for command, now in sorted(solvers_now.items()):
        before = recorded_version((shipped.get("solvers") or {}).get(command))
        after = now.shown
        if now.resolved is None:
            notes.append({"what": "solver not found", "name": command, "packed": before, "now": None,
                          "error_now": now.error})
        elif before != after:
            notes.append({"what": "solver version", "name": command, "packed": before, "now": after,
                          "error_now": now.error})
    py_then = (shipped.get("python") or {}).get("version")
    if py_then and py_then != platform.python_version():
        notes.append({"what": "python version", "name": "python", "packed": py_then,
                      "now": platform.python_version()})
    for name, then in sorted((shipped.get("key_packages") or {}).items()):
        now_v = version_of(name)
        if now_v != then:
            notes.append({"what": "package version", "name": name, "packed": then, "now": now_v})
    return notes
