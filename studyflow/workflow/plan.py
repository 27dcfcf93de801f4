"""The plan: every case and step as new, up to date or stale, and why, before anything runs.

studyflow answers this from its own hashes instead of asking Snakemake (a dry run of 10,000
jobs takes seconds and its reasons are per output file). A step is up to date when the signature
it would have now (``signature.py``: command, the files it reads, the upstream signature) equals
the one in its done marker and its declared outputs exist. Files the template provides are
hashed from the freshly rendered bytes in memory, so the plan needs no write; files an earlier
step wrote are hashed from disk only when their size or modification time differ from the
marker's record.
"""

from __future__ import annotations

import hashlib
import json
import os
from collections import Counter
from dataclasses import dataclass, field
from typing import TYPE_CHECKING

from ..render.cases import RenderedCase
from ..spec.model import Study
from . import signature as sig

if TYPE_CHECKING:
    import pandas as pd

NEW, UP_TO_DATE, STALE = "new", "up to date", "stale"


@dataclass(frozen=True)
class StepPlan:
    case: str
    step: str
    state: str  # NEW | UP_TO_DATE | STALE
    reason: str  # empty when up to date


@dataclass
class Plan:
    steps: list[StepPlan]
    removed: tuple[str, ...] = ()
    step_names: tuple[str, ...] = ()
    _by_case: dict[str, list[StepPlan]] = field(default_factory=dict, repr=False)

    def __post_init__(self) -> None:
        for sp in self.steps:
            self._by_case.setdefault(sp.case, []).append(sp)

    def to_run(self) -> list[StepPlan]:
        return [s for s in self.steps if s.state != UP_TO_DATE]

    def cases_to_run(self) -> list[str]:
        """Cases with at least one step to run, in design order."""
        return [c for c, steps in self._by_case.items() if any(s.state != UP_TO_DATE for s in steps)]

    def case_reason(self, case: str) -> str:
        """The reason of the case's first step that must run ('' when the case is up to date)."""
        for s in self._by_case.get(case, []):
            if s.state != UP_TO_DATE:
                return f"{s.step}: {s.reason}"
        return ""

    def counts(self) -> Counter:
        return Counter(s.state for s in self.steps)

    def reasons(self) -> Counter:
        return Counter(s.reason for s in self.steps if s.state != UP_TO_DATE)

    def frame(self) -> "pd.DataFrame":
        import pandas as pd

        return pd.DataFrame([s.__dict__ for s in self.steps], columns=["case", "step", "state", "reason"])


def _case_plan(cases_dir: str, rc: RenderedCase, shas: dict[int, str],
               started: str = "interrupted (started, never finished)") -> list[StepPlan]:
    case_dir = os.path.join(cases_dir, rc.case.id)
    # Parameter and mesh hashes only name the reason of a stale step: computed when needed.
    case_doc: dict = {}

    def doc_hashes() -> tuple[str, str]:
        if not case_doc:
            case_doc.update(json.loads(rc.case_json))
        return sig.params_hash(case_doc), sig.mesh_hash(case_doc)
    out: list[StepPlan] = []
    prev_sig: str | None = None
    prev_run = False  # the step before will run (so this one must too)

    def sha_of(data: bytes) -> str:
        key = id(data)
        got = shas.get(key)
        if got is None:
            got = shas[key] = hashlib.sha256(data).hexdigest()
        return got

    for doc in rc.steps:
        name = doc["step"]
        marker = sig.read_json(sig.marker_path(case_dir, name))
        if marker is None or marker.get("failed"):  # "failed": a cluster batch's failure marker
            status = sig.read_json(sig.status_path(case_dir, name))
            if status is None:
                state, reason = NEW, "never run"
            elif status.get("state") == "failed":
                state, reason = STALE, f"failed before ({status.get('reason')})"
            elif status.get("state") == "running":
                state, reason = STALE, started
            else:
                state, reason = STALE, "done marker missing"
            out.append(StepPlan(rc.case.id, name, state, reason))
            prev_run, prev_sig = True, None
            continue
        command = sig.command_hash(doc)
        recorded = marker.get("reads") or {}
        read_shas: dict[str, str] = {}
        template_changed = False
        missing_input = None
        changed_input = None
        for rel in doc["reads"]:
            data = rc.files.get(rel)
            if data is not None:
                read_shas[rel] = sha_of(data)
                if (recorded.get(rel) or {}).get("sha") != read_shas[rel]:
                    template_changed = True
                continue
            path = os.path.join(case_dir, rel)
            rec = recorded.get(rel) or {}
            try:
                st = os.stat(path)
            except OSError:
                if not prev_run:
                    missing_input = rel
                read_shas[rel] = ""
                continue
            if rec.get("size") == st.st_size and rec.get("mtime_ns") == st.st_mtime_ns and rec.get("sha"):
                read_shas[rel] = rec["sha"]
            else:
                read_shas[rel] = sig.sha_file(path)
                if read_shas[rel] != rec.get("sha"):
                    changed_input = rel
        expected = sig.signature(command, read_shas, prev_sig)
        if not prev_run and expected == marker.get("signature"):
            gone = next((w for w in doc["writes"] if not os.path.exists(os.path.join(case_dir, w))), None)
            if gone is None:
                out.append(StepPlan(rc.case.id, name, UP_TO_DATE, ""))
                prev_sig = marker.get("signature")
                continue
            reason = f"output missing ({gone})"
        elif prev_run:
            reason = "upstream step rerun"
        elif missing_input is not None:
            reason = f"input missing ({missing_input})"
        elif marker.get("params") != doc_hashes()[0]:
            reason = "parameter changed"
        elif marker.get("mesh") != doc_hashes()[1]:
            reason = "mesh changed"
        elif marker.get("command") != command:
            reason = "step command changed"
        elif template_changed:
            reason = "template changed"
        elif marker.get("upstream") != prev_sig:
            reason = "upstream step rerun"
        elif changed_input is not None:
            reason = f"input changed ({changed_input})"
        else:
            reason = "inputs changed"
        out.append(StepPlan(rc.case.id, name, STALE, reason))
        prev_run, prev_sig = True, None
    return out


def compute_plan(study: Study, rendered: list[RenderedCase], removed: tuple[str, ...] = (),
                 run_going: bool = False) -> Plan:
    """The plan for every rendered case (``render.render_all``), compared with what is on disk."""
    shas: dict[int, str] = {}
    steps: list[StepPlan] = []
    cases_dir = str(study.cases_dir)  # once: the property goes through pydantic and pathlib
    for rc in rendered:
        steps += _case_plan(cases_dir, rc, shas, *(("running now",) if run_going else ()))
    return Plan(steps, removed, tuple(study.step_names()))


def clear_stale_markers(study: Study, plan: Plan) -> int:
    """Remove the done marker of every step the plan will run, so the engine runs exactly those.

    The driver runs Snakemake with rerun triggers that only look at missing outputs; the plan
    (studyflow's hashes) is then the single source of what reruns.
    """
    n = 0
    for sp in plan.to_run():
        try:
            os.unlink(sig.marker_path(str(study.cases_dir / sp.case), sp.step))
            n += 1
        except FileNotFoundError:
            pass
    return n
