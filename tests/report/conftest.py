"""Shared fixtures: one synthetic study and its report, built once for the whole report test package."""

from __future__ import annotations

import sys
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).parent))  # the helper modules beside the tests

from report_synthetic import write_study


@pytest.fixture(scope="session")
def built(tmp_path_factory):
    """(study folder, ReportResult) of the synthetic study: 18 cases, one failed, one pending."""
    from studyflow.report import build_report

    root = write_study(tmp_path_factory.mktemp("reports") / "vent")
    return root, build_report(root)
