"""Where a study stands: counts, failures with reasons, time per case, time left.

Read from the case folders' status files and the run's ``.studyflow/run.json``, so it works while
a run is going (from another terminal) as well as after it.
"""

from __future__ import annotations

import time
from collections import Counter
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

from ..design.cases import Design, build_design
from ..spec.model import Study
from . import signature as sig
from .driver import RUN_INFO
from .lock import holder
from .state import DONE, FAILED, PENDING, RUNNING, CaseState, case_state

if TYPE_CHECKING:
    import pandas as pd

INTERRUPTED = "interrupted"


@dataclass
class StudyStatus:
    study: str
    cases: list[CaseState]
    running: dict[str, Any] | None  # lock holder (pid, host, started) when a run is going
    run: dict[str, Any] = field(default_factory=dict)  # .studyflow/run.json of the last run
    removed: tuple[str, ...] = ()

    def counts(self) -> Counter:
        return Counter(c.status for c in self.cases)

    @property
    def failures(self) -> list[CaseState]:
        return [c for c in self.cases if c.status == FAILED]

    def mean_wall_s(self) -> float | None:
        walls = [c.wall_s for c in self.cases if c.status == DONE and c.wall_s > 0]
        return sum(walls) / len(walls) if walls else None

    def time_left_s(self) -> float | None:
        """Remaining cases x mean wall time of a finished case / cores of the run (an estimate)."""
        left = sum(1 for c in self.cases if c.status in (PENDING, RUNNING, INTERRUPTED))
        mean = self.mean_wall_s()
        if not left:
            return 0.0
        if mean is None:
            return None
        cores = int(self.run.get("cores") or 1)
        return left * mean / max(cores, 1)

    def elapsed_s(self) -> float | None:
        start = self.run.get("started_at")
        if not start:
            return None
        end = self.run.get("ended_at") if not self.running else None
        return float((end or time.time()) - start)

    def frame(self) -> "pd.DataFrame":
        import pandas as pd

        return pd.DataFrame([{"case": c.case, "status": c.status, "reason": c.reason, "wall_s": c.wall_s}
                             for c in self.cases], columns=["case", "status", "reason", "wall_s"])


def study_status(study: Study, design: Design | None = None) -> StudyStatus:
    design = design or build_design(study)
    running = holder(study.state_dir)
    steps = study.step_names()
    cases = []
    for c in design.cases:
        st = case_state(study.cases_dir / c.id, steps)
        if st.status == RUNNING and running is None:
            # The status says running but no run holds the study: it was killed mid-step.
            st = CaseState(st.case, INTERRUPTED, st.reason.replace("running", "interrupted"), st.wall_s, st.steps)
        cases.append(st)
    run = sig.read_json(str(study.state_dir / RUN_INFO)) or {}
    from ..render.cases import removed_cases

    return StudyStatus(study.name, cases, running, run, removed_cases(study, design))
