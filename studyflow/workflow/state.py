"""The state of each case from its files: done, failed (with the reason), running or pending.

The collection layer uses ``case_state`` to decide what to collect: a case counts as done only
when every step has its done marker, which the step runner writes last, after the step's outputs
were checked. A half-written output (a step killed mid-way) therefore never counts as done.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from . import signature as sig

DONE, FAILED, RUNNING, PENDING = "done", "failed", "running", "pending"


@dataclass(frozen=True)
class StepState:
    step: str
    state: str  # ok | failed | running | none
    done: bool  # the done marker exists
    reason: str | None
    wall_s: float | None
    started_at: float | None
    exit_code: int | None = None
    started: str | None = None  # ISO 8601 UTC, as the status file has them
    ended: str | None = None
    host: str | None = None


@dataclass(frozen=True)
class CaseState:
    case: str
    status: str  # DONE | FAILED | RUNNING | PENDING
    reason: str  # "<step>: <reason>" for failed cases, "" otherwise
    wall_s: float  # sum of the steps' wall times recorded so far
    steps: tuple[StepState, ...]


def step_state(case_dir: Path, step: str) -> StepState:
    d = str(case_dir)
    st = sig.read_json(sig.status_path(d, step)) or {}
    # Done means a marker with a signature (what the step runner writes last); a cluster batch's
    # failure marker has none, and a failed status beside a marker means the same.
    marker = sig.read_json(sig.marker_path(d, step))
    done = bool(marker and marker.get("signature")) and st.get("state") != "failed"
    return StepState(step, st.get("state", "none"), done, st.get("reason"), st.get("wall_s"), st.get("started_at"),
                     st.get("exit_code"), st.get("started"), st.get("ended"), st.get("host"))


def case_state(case_dir: Path, steps: list[str]) -> CaseState:
    """State of the case in ``case_dir`` whose steps, in order, are ``steps``."""
    states = tuple(step_state(case_dir, s) for s in steps)
    wall = float(sum(s.wall_s or 0.0 for s in states))
    if states and all(s.done for s in states):
        return CaseState(case_dir.name, DONE, "", wall, states)
    for s in states:
        if s.done:
            continue
        if s.state == "failed":
            return CaseState(case_dir.name, FAILED, f"{s.step}: {s.reason}", wall, states)
        if s.state == "running":
            return CaseState(case_dir.name, RUNNING, f"{s.step}: running", wall, states)
        break
    return CaseState(case_dir.name, PENDING, "", wall, states)
