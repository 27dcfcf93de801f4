"""Small studies with trivial shell solvers for the reliability tests.

Every solver appends one line ``<case> <outcome>`` to ``<study>/executions.log`` (append-only, one
line per execution, written by the solver itself), so the tests count executions independently of
studyflow's own records.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from collections import Counter
from pathlib import Path

REPO = Path(__file__).resolve().parents[2]


# The workflow tests' study and process helpers serve here too (one copy).
sys.path.insert(0, str(REPO / "tests" / "workflow"))
from sfstudies import gone, wait_for, write_study  # noqa: E402,F401


# The solver takes its behaviour from its first argument; once the file <study>/healed exists it
# behaves (the engineer fixed the fault) and every later execution succeeds. A "gated" case waits
# until the test creates <study>/go-<case>, so tests can stop a run at a known point.
FAULT_SOLVER = r"""#!/bin/sh
mode="$1"
if [ -e ../../healed ]; then mode=ok; fi
echo "{{ case }} $mode" >> ../../executions.log
case "$mode" in
  ok)        printf '{"q": %s}\n' "{{ a * 10 + 16 / mesh.nx ** 2 }}" > out.json ;;
  gated)     n=0; while [ ! -e "../../go-{{ case }}" ] && [ $n -lt 900 ]; do sleep 0.05; n=$((n+1)); done
             printf '{"q": %s}\n' "{{ a * 10 + 16 / mesh.nx ** 2 }}" > out.json ;;
  crash)     printf '{"q": ' > out.json; kill -SEGV $$ ;;
  hang)      sleep 60; printf '{"q": 1}\n' > out.json ;;
  exitvalid) printf '{"q": 99}\n' > out.json; exit 3 ;;
  nan)       printf '{"q": NaN}\n' > out.json ;;
  inf)       printf '{"q": Infinity}\n' > out.json ;;
  truncated) printf '{"q": 1' > out.json ;;
  missing)   : ;;
esac
"""


def fault_study(root: Path, modes: dict[str, str], time_min: float = 0.02, levels: int = 1, extra: str = "") -> Path:
    """A case per entry of ``modes`` (point id -> solver behaviour) and mesh level. A good case
    writes q = 10 a + 16 / nx^2 (nx = 4 on level 0): second order in h, limit 10 a."""
    pts = ", ".join(f"{{id: {pid}, a: {i + 1}, mode: {mode}}}" for i, (pid, mode) in enumerate(modes.items()))
    study = f"""\
title: reliability faults
template: tpl
parameters:
  - kind: table
    points: [{pts}]
mesh: {{levels: {levels}, ratio: 2, counts: {{nx: 4}}}}
steps:
  - name: solve
    run: [sh, solve.sh, "{{{{ mode }}}}"]
    reads: [solve.sh]
    writes: [out.json]
    time_min: {time_min}
quantities:
  q: {{from: json, file: out.json, key: q}}
{extra}"""
    return write_study(root, study, {"solve.sh": FAULT_SOLVER})


def open_gate(root: Path, *cases: str) -> None:
    for case in cases:
        (root / f"go-{case}").touch()


def executions(root: Path) -> Counter:
    """How many times each case's solver ran (from the solver's own append-only file)."""
    path = root / "executions.log"
    lines = path.read_text().splitlines() if path.exists() else []
    return Counter(line.split()[0] for line in lines if line.strip())


def status(root: Path, case: str, step: str = "solve") -> dict:
    return json.loads((root / "cases" / case / ".studyflow" / f"{step}.status.json").read_text())


def cli(*args: str, **kw) -> subprocess.Popen:
    """``studyflow ARGS`` in a child process leading its own session (so tests can signal it)."""
    env = {**os.environ, "PYTHONPATH": str(REPO)}
    return subprocess.Popen([sys.executable, "-m", "studyflow.cli", *args], env=env, start_new_session=True,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, **kw)


def snapshot(root: Path) -> dict[str, tuple[int, int, bytes | None]]:
    """Every entry under ``root``: (mode, mtime_ns, bytes of regular files), to prove nothing changed."""
    out = {}
    for dirpath, dirnames, filenames in os.walk(root):
        for name in dirnames + filenames:
            p = Path(dirpath) / name
            st = p.lstat()
            data = p.read_bytes() if p.is_file() and not p.is_symlink() else None
            # A folder's own mtime changes with any entry added or removed, which is checked directly.
            mtime = None if p.is_dir() and not p.is_symlink() else st.st_mtime_ns
            out[str(p.relative_to(root))] = (st.st_mode, mtime, data)
    return out


def run_direct(root: Path) -> None:
    """Render the study and run every case's steps with the step runner, without the workflow
    engine (quick, for tests that need finished cases but are not about the engine)."""
    from studyflow import api
    from studyflow.workflow import runstep

    study = api.load_study(root)
    api.render(study)
    for case in api.design(study).cases:
        for step in study.step_names():
            if runstep.run(str(study.cases_dir / case.id), step) != 0:
                break


def processes_under(root: Path) -> list[int]:
    """Live processes whose working folder lies under ``root`` (a solver left running)."""
    root = root.resolve()
    found = []
    for entry in os.listdir("/proc"):
        if not entry.isdigit() or int(entry) == os.getpid():
            continue
        try:
            cwd = Path(os.readlink(f"/proc/{entry}/cwd"))
        except OSError:
            continue
        if cwd == root or root in cwd.parents:
            found.append(int(entry))
    return found
