"""Cluster runs: a study sent to a scheduler through Snakemake's executor plugins (SLURM).

studyflow schedules nothing itself. For a cluster run it checks the scheduler and the plugin
(``preflight``), writes the study's Snakemake profile from ``study.yaml`` (``profile``), hands
the driver the extra engine arguments, runs batched steps through a wrapper that keeps one
failed case from stopping its batch (``batchstep``), and afterwards gives cases a failed
scheduler job took down that job's reason (``outcome``).

Kept free of imports on purpose: every batched step starts ``python -m
studyflow.cluster.batchstep``, and importing this package must stay cheap for it.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from ..spec.model import Study
    from .profile import ClusterRun


def prepare(study: Study, check: bool = True) -> ClusterRun:
    """Check the scheduler (unless ``check`` is False) and write the study's profile.

    Returns the profile folder and the arguments and config entries the driver must add.
    Raises ``StudySpecError`` for a bad ``cluster:`` block and ``WorkflowError`` when the
    scheduler's commands, the plugin or a usable scheduler are missing.
    """
    from .preflight import check_scheduler
    from .profile import write_profile
    from .settings import cluster_settings

    settings = cluster_settings(study)
    scheduler = check_scheduler(settings) if check else None
    return write_profile(study, settings, scheduler)
