"""Small studies with shell steps for the workflow tests (trivial commands, so runs stay fast)."""

from __future__ import annotations

import json
import os
import time
from collections.abc import Callable
from pathlib import Path


def write_study(root: Path, study: str, files: dict[str, str]) -> Path:
    (root / "tpl").mkdir(parents=True, exist_ok=True)
    for rel, text in files.items():
        p = root / "tpl" / rel
        p.parent.mkdir(parents=True, exist_ok=True)
        p.write_text(text)
    (root / "study.yaml").write_text(study)
    return root


def wait_for(cond: Callable[[], bool], timeout: float = 120.0) -> None:
    deadline = time.time() + timeout
    while not cond():
        assert time.time() < deadline, "timed out waiting"
        time.sleep(0.02)


def gone(pgid: int) -> bool:
    """True when no process of the group ``pgid`` is left."""
    try:
        os.killpg(pgid, 0)
    except ProcessLookupError:
        return True
    return False


def table_study(root: Path, points: int, levels: int, sleep: float = 0.0, extra: str = "") -> Path:
    """``points`` table points x ``levels`` mesh levels; one step that records each execution.

    The step appends its case id to ``<study>/runs.log`` (append-only, one line per execution)
    after writing ``out.txt`` in two halves with an optional pause between them, so a kill in the
    middle leaves a half-written output behind.
    """
    pts = ", ".join(f"{{id: p{i:02d}, a: {i}}}" for i in range(points))
    study = f"""\
title: rerun test
template: tpl
parameters:
  - kind: table
    points: [{pts}]
mesh: {{levels: {levels}, ratio: 2, counts: {{nx: 2}}}}
steps:
  - name: solve
    run: [sh, step.sh]
    reads: [step.sh, in.txt]
    writes: [out.txt]
quantities:
  result: {{from: json, file: out.txt, key: result}}
{extra}"""
    pause = f"sleep {sleep}\n" if sleep else ""
    # Shell built-ins only (read, printf, echo): the step must cost next to nothing.
    step = ("read a < in.txt\n"
            "printf '{\"result\": ' > out.txt\n"
            f"{pause}"
            "printf '%s}\\n' \"$a\" >> out.txt\n"
            "echo \"{{ case }}\" >> ../../runs.log\n")
    return write_study(root, study, {"step.sh": step, "in.txt": "{{ a * 10 + mesh.nx }}\n"})


def executions(root: Path) -> list[str]:
    path = root / "runs.log"
    return path.read_text().split() if path.exists() else []


def status(root: Path, case: str, step: str = "solve") -> dict:
    return json.loads((root / "cases" / case / ".studyflow" / f"{step}.status.json").read_text())


def steps_study(root: Path, points: int, extra: str = "") -> Path:
    """Two steps per case; point ``p03``'s first step fails. Every step start is logged."""
    pts = ", ".join(f"{{id: p{i:02d}, a: {i}}}" for i in range(points))
    study = f"""\
title: batch test
template: tpl
parameters:
  - kind: table
    points: [{pts}]
steps:
  - name: make
    run: [sh, make.sh]
    reads: [make.sh]
    writes: [in.txt]
  - name: post
    run: [sh, post.sh]
    reads: [post.sh]
    writes: [out.txt]
quantities:
  result: {{from: json, file: out.txt, key: result}}
{extra}"""
    make = ("echo \"make {{ case }}\" >> ../../runs.log\n"
            "{% if case.startswith('p03') %}echo 'mesher: no cells' >&2; exit 4{% endif %}\n"
            "echo '{{ a }}' > in.txt\n")
    post = ("read a < in.txt\necho \"{\\\"result\\\": $a}\" > out.txt\necho \"post {{ case }}\" >> ../../runs.log\n")
    return write_study(root, study, {"make.sh": make, "post.sh": post})
