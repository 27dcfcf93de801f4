"""Local batches: many cases per Snakemake job when a run has many short cases (see runbatch.py).

A run chooses with ``batch``: ``"off"`` (one Snakemake job per step of each case), a whole number
(that many cases per job), or ``"auto"`` (the default): off while a run has at most
``AUTO_MIN_PER_CORE`` cases per core, where the engine's ~30 ms per job cannot matter; above,
enough batches that each core gets ``AUTO_BATCHES_PER_CORE`` of them (so a slow batch at the end
leaves the other cores little idle time) and no batch holds more than ``AUTO_MAX_CASES`` cases.

Cases are dealt to batches by the longest-processing-time rule (Graham, "Bounds on
multiprocessing timing anomalies", SIAM J. Appl. Math. 17, 1969): in decreasing order of
their estimated cost, each to the batch with the least cost so far. The estimate is the mesh
level's cell count (or h^-dim), so the fine meshes of a refinement study spread over all batches
instead of piling up in the same few.
"""

from __future__ import annotations

import heapq
import math
import os
import shutil
from pathlib import Path
from typing import Mapping, Sequence

from ..design.cases import Design
from ..errors import WorkflowError
from . import signature as sig
from .rules_support import BATCHES, batch_path

AUTO_MIN_PER_CORE = 8
AUTO_BATCHES_PER_CORE = 8
AUTO_MAX_CASES = 100
STOP_FILE = "stop.json"


def parse_setting(value: object, where: str = "batch") -> str | int:
    """``"auto"``, ``"off"`` or a positive whole number of cases per job."""
    if isinstance(value, bool):
        raise WorkflowError(f"{where} must be auto, off or a whole number of cases per job (got {value!r})")
    if isinstance(value, int):
        if value < 1:
            raise WorkflowError(f"{where} must be at least 1 case per job (got {value})")
        return value
    text = str(value).strip().lower()
    if text in ("auto", "off"):
        return text
    try:
        n = int(text)
    except ValueError:
        raise WorkflowError(f"{where} must be auto, off or a whole number of cases per job (got {value!r})") from None
    return parse_setting(n, where)


def batch_count(n_cases: int, cores: int, setting: str | int) -> int:
    """How many batches ``n_cases`` go into; 0 means one job per step (no batches)."""
    if setting == "off" or n_cases == 0:
        return 0
    if setting == "auto":
        if n_cases <= AUTO_MIN_PER_CORE * cores:
            return 0
        return min(n_cases, max(AUTO_BATCHES_PER_CORE * cores, math.ceil(n_cases / AUTO_MAX_CASES)))
    return math.ceil(n_cases / int(setting))


def deal(cases: Sequence[str], count: int, costs: Mapping[str, float] | None = None) -> list[list[str]]:
    """Split ``cases`` into ``count`` batches of near-equal total cost (longest processing time
    first); each batch keeps the cases' own order."""
    count = max(1, min(count, len(cases)))
    costs = costs or {}
    order = {c: i for i, c in enumerate(cases)}
    heap = [(0.0, k) for k in range(count)]
    members: list[list[str]] = [[] for _ in range(count)]
    for case in sorted(cases, key=lambda c: (-float(costs.get(c, 1.0)), order[c])):
        load, k = heapq.heappop(heap)
        members[k].append(case)
        heapq.heappush(heap, (load + float(costs.get(case, 1.0)), k))
    return [sorted(m, key=order.__getitem__) for m in members if m]


def case_costs(design: Design) -> dict[str, float]:
    """Estimated relative cost of each case: its cells, else h^-dim, else 1."""
    out = {}
    for case in design.cases:
        m = case.mesh
        if m.cells:
            out[case.id] = float(m.cells)
        elif m.h:
            out[case.id] = float(m.h) ** -(design.dim or 2)
        else:
            out[case.id] = 1.0
    return out


def batch_dir(state_dir: Path) -> Path:
    return state_dir / BATCHES


def clear(state_dir: Path) -> None:
    """Remove the batch files of an earlier run (they are only meaningful within one run)."""
    shutil.rmtree(batch_dir(state_dir), ignore_errors=True)


def write(state_dir: Path, cases_dir: Path, batches: Sequence[Sequence[str]], steps: Sequence[str],
          retries: int, keep_going: bool) -> list[str]:
    """Write one batch file per batch; returns the targets (relative to the study folder)."""
    clear(state_dir)
    folder = batch_dir(state_dir)
    folder.mkdir(parents=True)
    stop = str(folder / STOP_FILE)
    width = max(5, len(str(len(batches) - 1)))
    targets = []
    for k, members in enumerate(batches):
        name = f"b{k:0{width}d}"
        sig.write_json_atomic(str(folder / f"{name}.json"), {
            "cases": [os.fspath(cases_dir / c) for c in members], "steps": list(steps),
            "retries": int(retries), "keep_going": bool(keep_going), "stop_file": stop})
        targets.append(batch_path("", name))
    return targets
