"""Turn the driver's engine options for a local run into those of a cluster run."""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from pathlib import Path

from ..errors import Problem, StudySpecError, WorkflowError
from ..spec.model import Study
from ..workflow.driver import EngineOptions
from .outcome import finish_cluster_run
from .preflight import check_requests, check_scheduler
from .profile import ClusterRun, job_requests, write_profile
from .settings import EXECUTORS, cluster_settings


def cluster_options(study: Study, options: EngineOptions, executor: str = "slurm",
                    check: bool = True) -> tuple[EngineOptions, ClusterRun]:
    """``options`` extended for ``executor``: the study's profile, batching, failure reasons.

    Checks the ``cluster:`` block and (``check``) the scheduler and plugin first, so nothing is
    rendered or submitted when they are missing.
    """
    if executor not in EXECUTORS:
        raise WorkflowError(f"unknown executor {executor!r}; studyflow runs on: local, {', '.join(EXECUTORS)}")
    settings = cluster_settings(study)
    if settings.executor != executor:
        raise StudySpecError(Problem(str(study.file), "cluster.executor", settings.executor,
                                     f"the study is set up for {settings.executor}, but the run asks for {executor}"))
    scheduler = check_scheduler(settings) if check else None
    if check:
        check_requests(job_requests(study, settings))
    run = write_profile(study, settings, scheduler)
    previous = options.after_engine

    def after_engine(st: Study, cases: Sequence[str], log: Path, started: float) -> None:
        finish_cluster_run(st, cases, log, started)
        if previous is not None:
            previous(st, cases, log, started)

    return dataclasses.replace(
        options,
        extra_args=tuple(options.extra_args) + run.args,
        config=tuple(options.config) + run.config,
        after_engine=after_engine,
        batch="off",  # the scheduler's job groups batch cases on a cluster
    ), run
