"""The study report: figures, tables and one self-contained HTML page in ``<study>/report/``.

``build_report(study)`` reads only what the collection and analysis layers wrote (``results/``) and
the case folders' state files, so it can be rebuilt at any time, also while cases still run.
"""

from .build import ReportResult, build_report

__all__ = ["ReportResult", "build_report"]
