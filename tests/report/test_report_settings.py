"""The report block is read with the study loader's number rules."""

from __future__ import annotations

from studyflow.report.settings import load_settings


def test_reference_values_in_exponent_form_are_numbers(tmp_path):
    # YAML 1.2 core schema (yaml.org/spec/1.2.2, section 10.3.2): 2e3 and 1.35e-2 are floats;
    # DEVELOPERS.md asks every reader of a study file to follow it, as the study loader does.
    (tmp_path / "study.yaml").write_text(
        "title: invented reference values\n"
        "report:\n"
        "  references:\n"
        "    drag: {value: 1.35e-2, label: a}\n"
        "    lift: {value: 2e3, label: b}\n",
        encoding="utf-8",
    )
    refs = load_settings(tmp_path).references
    assert refs["drag"].value == 0.0135
    assert refs["lift"].value == 2000.0
