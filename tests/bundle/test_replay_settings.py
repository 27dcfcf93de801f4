"""Audit tolerances come from the study file or the audit stops (studyflow.bundle.replay)."""

from __future__ import annotations

import pytest

from studyflow.bundle.replay import audit_settings
from studyflow.errors import AuditError


def test_unreadable_study_file_is_an_audit_error_not_default_tolerances(tmp_path) -> None:
    bad = tmp_path / "study.yaml"
    bad.write_text("audit: {rel_tol: [1,\n")  # unclosed flow sequence
    with pytest.raises(AuditError) as info:
        audit_settings(bad)
    assert str(bad) in str(info.value) and "cannot read the study's audit tolerances" in str(info.value)
    with pytest.raises(AuditError):
        audit_settings(tmp_path / "missing.yaml")
