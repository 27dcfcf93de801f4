"""One run of a study: lock, render, plan, clear stale markers, drive the engine, read outcomes."""

from __future__ import annotations

import dataclasses
import sys
from dataclasses import dataclass, field
from typing import Any, Callable, Sequence

from ..design.cases import Design, build_design
from ..errors import EXIT_CASES_FAILED, EXIT_INTERRUPTED, EXIT_OK, WorkflowError
from ..render.cases import RenderResult, make_renderer, removed_cases, render_all, render_study
from ..spec.model import Study
from .batches import case_costs
from .driver import EngineOptions, EngineResult, EngineStart, log_tail, run_engine
from .lock import RunLock, holder
from .plan import Plan, clear_stale_markers, compute_plan
from .state import DONE, FAILED, CaseState, case_state


@dataclass
class RunOutcome:
    plan: Plan
    render: RenderResult | None
    engine: EngineResult | None
    cases: list[CaseState] = field(default_factory=list)  # the cases this run targeted
    dry: bool = False
    tables: Any = None  # the collected tables, when the caller collected after the run

    @property
    def failed(self) -> list[CaseState]:
        return [c for c in self.cases if c.status == FAILED]

    @property
    def done(self) -> list[CaseState]:
        return [c for c in self.cases if c.status == DONE]

    @property
    def interrupted(self) -> bool:
        return bool(self.engine and self.engine.interrupted)

    @property
    def refused_outputs(self) -> list[tuple[str, str]]:
        """(case, reason) of cases whose steps all ended well but whose outputs the collection
        refused (non-finite value, unreadable file); empty when nothing was collected."""
        cases = getattr(self.tables, "cases", None)
        if cases is None or "status" not in getattr(cases, "columns", ()):
            return []
        failed_steps = {c.case for c in self.failed}
        rows = cases[(cases["status"] == "failed") & ~cases["case"].isin(failed_steps)]
        return list(zip(rows["case"], rows["reason"]))

    @property
    def exit_code(self) -> int:
        if self.interrupted:
            return EXIT_INTERRUPTED
        if self.failed or any(c.status != DONE for c in self.cases) and not self.dry:
            return EXIT_CASES_FAILED
        if self.refused_outputs:  # a NaN result is a failed case too (issue 2), not a success
            return EXIT_CASES_FAILED
        return EXIT_OK


def plan_study(study: Study, design: Design | None = None, time_limit_s: float | None = None) -> Plan:
    """What a run would do now; renders in memory only, writes nothing."""
    design = design or build_design(study)
    rendered = render_all(study, design, make_renderer(study, time_limit_s))
    # While another run holds the study, a step with a "running" status is running, not killed.
    going = holder(study.state_dir) is not None
    return compute_plan(study, rendered, removed_cases(study, design), run_going=going)


def run_study(study: Study, design: Design | None = None, options: EngineOptions | None = None,
              time_limit_s: float | None = None, dry: bool = False,
              report: Callable[[str, bool], None] | None = None,
              after: Callable[[RunOutcome], None] | None = None) -> RunOutcome:
    """Render, plan and run every stale case; ``after`` (e.g. collection) runs under the lock.

    Everything is rendered and checked in memory before the first file is written, so a bad
    template leaves every case as it was. Only the plan's stale cases are passed to the engine.
    """
    options = options or EngineOptions()
    design = design or build_design(study)
    with RunLock(study.state_dir) as lock:
        fds = (lock.fd,) if lock.fd else ()
        # The engine starts on another core while the cases are rendered and planned; if they
        # stop the run (a template error), it is killed and leaves no file behind.
        start = None if dry else EngineStart(study, options, inherit_fds=fds)
        try:
            rendered = render_all(study, design, make_renderer(study, time_limit_s))
            return _locked_run(study, design, rendered, options, dry, report, after, fds, start)
        finally:
            if start is not None:
                start.discard()


def _locked_run(study: Study, design: Design, rendered: list, options: EngineOptions, dry: bool,
                report: Callable[[str, bool], None] | None, after: Callable[[RunOutcome], None] | None,
                fds: tuple[int, ...], start: EngineStart | None) -> RunOutcome:
    plan = compute_plan(study, rendered, removed_cases(study, design))
    if dry:
        return RunOutcome(plan, None, None, dry=True)
    result = render_study(study, design, rendered=rendered)
    clear_stale_markers(study, plan)
    cases = plan.cases_to_run()
    engine = None
    if not cases and start is not None:
        start.discard()
    if cases and options.progress:
        why = ", ".join(f"{n} {r}" for r, n in plan.reasons().most_common(3))
        say = report or (lambda text, final: print(text, file=sys.stderr, flush=True))
        say(f"studyflow: {len(cases)} of {len(design.cases)} cases to run ({why})", True)
    if cases:
        if options.costs is None:
            options = dataclasses.replace(options, costs=case_costs(design))
        engine = run_engine(study, cases, options, report, inherit_fds=fds, start=start)
    steps = study.step_names()
    states = [case_state(study.cases_dir / c, steps) for c in cases]
    outcome = RunOutcome(plan, result, engine, states)
    # The engine failing while no case failed and some never finished: it stopped before running
    # them (a Snakefile or option problem). When every case finished well by its own records (a
    # scheduler cancelled a job after its step had ended), the results stand and are collected.
    unfinished = any(c.status != DONE for c in states)
    if engine and engine.returncode != 0 and not engine.interrupted and not outcome.failed and unfinished:
        raise WorkflowError(f"Snakemake stopped with exit code {engine.returncode} before running the "
                            f"cases; its log is {engine.log}:\n{log_tail(engine.log)}")
    if after is not None:
        after(outcome)
    return outcome


def options(cores: int | None = None, keep_going: bool = True, retries: int | None = None,
            extra_args: Sequence[str] = (), progress: bool = True, batch: str | int = "auto") -> EngineOptions:
    return EngineOptions(cores=cores, keep_going=keep_going, retries=retries, extra_args=tuple(extra_args),
                         progress=progress, batch=batch)
