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


def test_view_window_is_read_and_bad_ones_are_named(tmp_path):
    import pytest

    from studyflow.errors import InputError

    study = tmp_path / "study.yaml"
    study.write_text("title: invented\nreport:\n  view: {x: [-0.05, 1.1], y: [0, 1.2e-1]}\n", encoding="utf-8")
    assert load_settings(tmp_path).view == (-0.05, 1.1, 0.0, 0.12)
    for block, key, shown in (("{x: [1, 0], y: [0, 1]}", "report.view.x", "[1, 0]"),
                              ("{x: [0, 1], y: [0]}", "report.view.y", "[0]"),
                              ("{x: [0, 1]}", "report.view", "{'x': [0, 1]}"),
                              ("{x: [0, 1], y: [0, one]}", "report.view.y", "[0, 'one']")):
        study.write_text(f"title: invented\nreport:\n  view: {block}\n", encoding="utf-8")
        with pytest.raises(InputError) as err:
            load_settings(tmp_path)
        assert f"{study}: {key}" in str(err.value) and shown in str(err.value)
