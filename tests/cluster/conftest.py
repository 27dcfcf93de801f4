"""The local single-node SLURM cluster for the cluster tests.

Tests marked ``slurm`` get the ``slurm_cluster`` fixture. They are skipped only where the SLURM
commands are absent. Where the commands are present but the cluster is not running, the fixture
starts it with ``scripts/slurm-local start`` (so plain ``python -m pytest`` works too) and
stops it again at the end of the session; a cluster that was already running is left running.
"""

from __future__ import annotations

import shutil
import subprocess
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[2]
SCRIPT = REPO / "scripts" / "slurm-local"
COMMANDS = ("sbatch", "squeue", "sinfo", "scontrol", "slurmctld", "slurmd", "munged")


def _node_idle() -> bool:
    try:
        out = subprocess.run(["timeout", "-k", "2", "10", "sinfo", "-h", "-N", "-o", "%T"],
                             capture_output=True, text=True, check=False)
    except OSError:
        return False
    return out.returncode == 0 and any(s.startswith(("idle", "mix", "alloc")) for s in out.stdout.split())


@pytest.fixture(scope="session")
def slurm_cluster():
    missing = [c for c in COMMANDS if shutil.which(c) is None]
    if missing:
        pytest.skip(f"SLURM commands absent ({', '.join(missing)}): install slurm-wlm and munge "
                    "(scripts/setup) to run the cluster tests")
    started = False
    if not _node_idle():
        done = subprocess.run(["timeout", "-k", "10", "120", str(SCRIPT), "start"],
                              capture_output=True, text=True, check=False)
        if done.returncode != 0 or not _node_idle():
            pytest.fail(f"the SLURM commands are installed but the local cluster did not start "
                        f"(scripts/slurm-local start exited {done.returncode}):\n{done.stdout}\n{done.stderr}")
        started = True
    yield
    if started:
        subprocess.run(["timeout", "-k", "5", "60", str(SCRIPT), "stop"], capture_output=True, check=False)
