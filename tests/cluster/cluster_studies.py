"""Small invented studies for the cluster tests (demo data only).

The solver is a shell script: it writes ``y = 2 x`` for its parameter ``x``, so every collected
value has an exact answer to check. A negative ``x`` makes it fail on purpose (exit code 3); an
``x`` of 99 makes it cancel its own scheduler job, a failure only the scheduler can explain.
"""

from __future__ import annotations

from pathlib import Path

import yaml

SCRIPT = """\
# invented demo case, value {{ x }}
if [ "{{ x }}" -eq 99 ]; then
  echo "cancelling my own scheduler job $SLURM_JOB_ID"
  scancel "$SLURM_JOB_ID"
  # The scheduler's SIGTERM may reach this sleep before the step runner; the shell then goes on,
  # so wait again (the SIGKILL after KillWait ends it) and never fall through to a good output.
  sleep 60 || sleep 60
  exit 7
fi
if [ "{{ x }}" -lt 0 ]; then echo "negative input {{ x }}" >&2; exit 3; fi
echo "{\\"y\\": $(( {{ x }} * 2 ))}" > metrics.json
"""


POST = "cp metrics.json summary.json\n"


def make_study(root: Path, values: list[int], cluster: dict | None,
               resources: dict | None = None, post: bool = False) -> Path:
    """A study folder under ``root`` with one case per value of ``x``; returns the folder.
    ``post`` adds a second step that copies the first step's output."""
    (root / "template").mkdir(parents=True, exist_ok=True)
    (root / "template" / "case.sh").write_text(SCRIPT)
    study = root / "study"
    study.mkdir(exist_ok=True)
    doc = {
        "title": "Cluster smoke study (invented)",
        "template": "../template",
        "parameters": [{"kind": "product", "values": {"x": values}}],
        "steps": [{"name": "solve", "run": ["sh", "case.sh"], "reads": ["case.sh"], "writes": ["metrics.json"]}],
        "quantities": {"y": {"from": "json", "file": "metrics.json", "key": "y"}},
        "resources": resources or {"cores": 1, "memory_mb": 300, "time_min": 3},
    }
    if post:
        (root / "template" / "post.sh").write_text(POST)
        doc["steps"].append({"name": "post", "run": ["sh", "post.sh"], "reads": ["post.sh", "metrics.json"],
                             "writes": ["summary.json"]})
    if cluster is not None:
        doc["cluster"] = cluster
    (study / "study.yaml").write_text(yaml.safe_dump(doc, sort_keys=False))
    return study


CAVITY_TOML = """\
# invented demo: lid-driven cavity on a coarse mesh
[case]
kind = "cavity"
reynolds = {{ Re }}

[mesh]
nx = {{ mesh.nx }}
ny = {{ mesh.ny }}
"""


def make_cavity_study(root: Path, cluster: dict, reynolds: list[float], failing_re: float) -> Path:
    """Cavity cases of the bundled solver (studyflow-fv) on an 8 x 8 mesh, one per Reynolds
    number, plus the point ``too-fast`` whose Reynolds number the solver refuses (exit code 3,
    a bad case file) on purpose."""
    (root / "template").mkdir(parents=True, exist_ok=True)
    (root / "template" / "case.toml").write_text(CAVITY_TOML)
    study = root / "study"
    study.mkdir(exist_ok=True)
    doc = {
        "title": "Coarse cavity sweep on a cluster (invented)",
        "template": "../template",
        "constants": {"solver": "studyflow-fv"},
        "parameters": [{"kind": "product", "values": {"Re": reynolds}},
                       {"kind": "table", "points": [{"id": "too-fast", "Re": failing_re}]}],
        "mesh": {"levels": 1, "counts": {"nx": 8, "ny": 8}},
        "steps": [{"name": "solve", "run": "{{ solver }} case.toml --quiet", "reads": ["case.toml"],
                   "writes": ["metrics.json", "history.csv", "fields.vtu"]}],
        "quantities": {"u_min": {"from": "json", "file": "metrics.json", "key": "u_min"}},
        "resources": {"cores": 1, "memory_mb": 300, "time_min": 3},
        "cluster": cluster,
    }
    (study / "study.yaml").write_text(yaml.safe_dump(doc, sort_keys=False))
    return study
