"""The Python facade of studyflow: what the command line does, callable from a script or notebook.

    >>> from studyflow import api
    >>> study = api.load_study("studies/duct-lining")
    >>> api.plan(study).frame()            # every case and step: new, up to date or stale, and why
    >>> outcome = api.run(study, cores=2)   # runs the stale cases, then collects the results
    >>> api.results(study).results          # the tidy results table as a DataFrame

Every function takes a loaded ``Study`` or a path to a study folder or file.
"""

from __future__ import annotations

import os
from typing import TYPE_CHECKING, Any, Callable, Sequence, Union

from .design.cases import Design, build_design
from .errors import CollectError, StudySpecError
from .render.cases import RenderResult, make_renderer, render_all, render_study
from .spec.loader import load_study as _load_spec
from .spec.model import Study
from .spec.scaffold import list_examples, new_study
from .workflow.batches import parse_setting as parse_batch
from .workflow.driver import EngineOptions
from .workflow.plan import Plan
from .workflow.run import RunOutcome, plan_study, run_study
from .workflow.status import StudyStatus, study_status

# The upper layers, imported on first use (PEP 562): a plan or a status should not pay for
# matplotlib, scipy and pandas. name -> (module, attribute).
_LATER = {
    "AuditReport": ("bundle", "AuditReport"), "PackResult": ("bundle", "PackResult"),
    "RerunChoice": ("bundle", "RerunChoice"), "audit": ("bundle", "audit"), "pack": ("bundle", "pack"),
    "assess": ("analysis.study", "assess_study"),  # uncertainty table (analysis)
    "report": ("report", "build_report"),  # HTML report, figures and tables (report)
    "collect_case": ("collect", "collect_case"), "read_results": ("collect", "read_results"),
    "write_tables": ("collect", "write_tables"),
}

if TYPE_CHECKING:
    from .analysis.study import assess_study as assess  # noqa: F401
    from .bundle import AuditReport, PackResult, RerunChoice, audit, pack  # noqa: F401
    from .collect import collect_case, read_results, write_tables  # noqa: F401
    from .report import build_report as report  # noqa: F401


def __getattr__(name: str) -> Any:
    where = _LATER.get(name)
    if where is None:
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
    import importlib

    value = getattr(importlib.import_module(f"{__package__}.{where[0]}"), where[1])
    globals()[name] = value
    return value


StudyLike = Union[Study, str, os.PathLike]

__all__ = [
    "load_study", "design", "render", "plan", "run", "status", "collect", "results", "new_study",
    "list_examples", "Study", "Design", "Plan", "RunOutcome", "StudyStatus",
]


def load_study(path: StudyLike) -> Study:
    """Load and check a study: the schema, the cross-key rules and every quantity's collector
    options. Raises ``StudySpecError`` (or ``CollectError``) listing every problem."""
    return _load(path)[0]


def _load(path: StudyLike) -> tuple[Study, Design | None]:
    """The study and, when it was just loaded, the design built to check it (so a run of 10,000
    cases does not build it twice)."""
    if isinstance(path, Study):
        return path, None
    study = _load_spec(path)
    return study, _check_quantities(study)


def _check_quantities(study: Study) -> Design | None:
    try:
        from .collect import check_quantities
    except ImportError:  # collection layer not installed in this build
        return None
    design = build_design(study)
    try:
        check_quantities(study.quantities, iteration=study.iteration, mesh=study.mesh,
                         parameters=design.parameter_names, file=str(study.file))
    except CollectError as exc:
        raise StudySpecError(exc.problems, headline=exc.headline) from None
    return design


def design(study: StudyLike) -> Design:
    """The case table (``.frame()`` gives it as a DataFrame)."""
    return build_design(load_study(study))


def render(study: StudyLike, time_limit_s: float | None = None) -> RenderResult:
    """Render every case folder (write-if-changed); reports removed cases without deleting them."""
    study = load_study(study)
    d = build_design(study)
    return render_study(study, d, rendered=render_all(study, d, make_renderer(study, time_limit_s)))


def plan(study: StudyLike) -> Plan:
    """What a run would do now, and why; writes nothing."""
    study, design = _load(study)
    return plan_study(study, design)


def run(study: StudyLike, cores: int | None = None, keep_going: bool = True, retries: int | None = None,
        timeout_s: float | None = None, dry: bool = False, extra_args: Sequence[str] = (),
        progress: bool = True, collect: bool = True,
        report: Callable[[str, bool], None] | None = None, executor: str | None = None,
        batch: str | int = "auto") -> RunOutcome:
    """Run every stale case through Snakemake, then collect the results table (also when some
    cases failed). ``outcome.exit_code`` is the command line's exit code. ``executor="slurm"``
    sends the cases to SLURM with the study's ``cluster:`` settings (docs/cluster.md).
    ``batch``: local runs only, cases per Snakemake job (``"auto"``, ``"off"`` or a number;
    see studyflow.workflow.batches)."""
    study, design = _load(study)
    opts = EngineOptions(cores=cores, keep_going=keep_going, retries=retries, extra_args=tuple(extra_args),
                         progress=progress, batch=parse_batch(batch))
    if executor and executor != "local" and not dry:
        from .cluster.run import cluster_options

        opts, _ = cluster_options(study, opts, executor)

    def after(outcome: RunOutcome) -> None:
        if collect and not outcome.interrupted:
            outcome.tables = _collect(study, write=True)

    return run_study(study, design, options=opts, time_limit_s=timeout_s, dry=dry, report=report, after=after)


def status(study: StudyLike) -> StudyStatus:
    """Counts, failures with reasons, time per case and time left; works while a run is going."""
    return study_status(load_study(study))


def _collect(study: Study, write: bool) -> Any:
    try:
        from .collect import collect_study
    except ImportError as exc:  # pragma: no cover - collection layer missing from this build
        raise CollectError([], headline=f"the collection layer is not available: {exc}") from None
    return collect_study(study, write=write)


def collect(study: StudyLike, write: bool = True) -> Any:
    """Collect every case into the tidy tables (``results/``); returns them (``.results``,
    ``.histories``, ``.cases`` DataFrames)."""
    return _collect(load_study(study), write)


def results(study: StudyLike) -> Any:
    """The tables written by the last collection, read back from ``results/``."""
    from .collect import read_results

    return read_results(load_study(study).root)
