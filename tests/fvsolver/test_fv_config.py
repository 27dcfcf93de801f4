"""Case-file validation: every problem is reported with the file, the key and the bad value."""

from __future__ import annotations

import pytest

from studyflow.fvsolver.config import load, parse
from studyflow.fvsolver.errors import EXIT_BAD_INPUT, CaseFileError


def _issues(data):
    with pytest.raises(CaseFileError) as info:
        parse(data, "case.toml")
    return info.value


def test_defaults_fill_in():
    cfg = parse({"case": {"kind": "plate"}, "mesh": {"nx": 64, "ny": 32}})
    assert cfg.reynolds == 1.0e4 and cfg.domain == {"upstream": 1.0, "height": 3.0, "buffer": 0.5}
    assert cfg.tolerance == 1e-10 and cfg.history == "history.csv"


@pytest.mark.parametrize("data, key, value, words", [
    ({"case": {"kind": "duct"}, "mesh": {"nx": 8, "ny": 8}}, "case.kind", "duct", "must be one of"),
    ({"case": {"kind": "cavity"}, "mesh": {"nx": -3, "ny": 8}}, "mesh.nx", -3, "between"),
    ({"case": {"kind": "cavity"}, "mesh": {"nx": 9, "ny": 8}}, "mesh.nx", 9, "must be even"),
    ({"case": {"kind": "cavity", "reynolds": "high"}, "mesh": {"nx": 8, "ny": 8}}, "case.reynolds", "high",
     "positive"),
    ({"case": {"kind": "cavity"}, "mesh": {"nx": 8, "ny": 8, "stretch_x": 0.5}}, "mesh.stretch_x", 0.5, "between"),
    ({"case": {"kind": "cavity"}, "mesh": {"nx": 8, "ny": 8}, "solve": {"tolerance": -1}}, "solve.tolerance", -1,
     "positive"),
    ({"case": {"kind": "cavity"}, "mesh": {"nx": 8, "ny": 8}, "solve": {"chord": "yes"}}, "solve.chord", "yes",
     "true or false"),
    ({"case": {"kind": "cavity"}, "mesh": {"nx": 8, "ny": 8}, "output": {"fields": "../x.vtu"}}, "output.fields",
     "../x.vtu", "inside the case folder"),
    ({"case": {"kind": "cavity"}, "mesh": {"nx": 8, "ny": 8, "nz": 4}}, "mesh.nz", 4, "unknown key"),
    ({"case": {"kind": "plate"}, "mesh": {"nx": 64, "ny": 8}, "plate": {"stations": [0.5, 1.5]}}, "plate.stations",
     [0.5, 1.5], "list of numbers"),
    ({"case": {"kind": "channel"}, "mesh": {"nx": 8, "ny": 8}, "channel": {"gradient_from": 0.9, "gradient_to": 0.5}},
     "channel.gradient_to", 0.5, "larger than"),
    ({"case": {"kind": "step", "reynolds": 100.0}, "mesh": {"nx": 8, "ny": 8}, "solve": {"ramp": [50.0, 200.0]}},
     "solve.ramp", [50.0, 200.0], "below case.reynolds"),
    ({"case": {"kind": "step"}, "mesh": {"nx": 8, "ny": 8}, "solve": {"ramp": [60.0, 20.0]}}, "solve.ramp",
     [60.0, 20.0], "increasing"),
])
def test_bad_values_are_named(data, key, value, words):
    err = _issues(data)
    text = str(err)
    assert f"case.toml: {key}" in text and repr(value) in text and words in text, text
    assert err.exit_code == EXIT_BAD_INPUT == 3


def test_all_problems_reported_together():
    err = _issues({"case": {"kind": "cavity"}, "mesh": {"nx": 3, "ny": "ten"}, "extra": {}})
    keys = {i.key for i in err.issues}
    assert {"mesh.nx", "mesh.ny", "extra"} <= keys


def test_missing_required_keys():
    err = _issues({"case": {}})
    assert any(i.key == "case.kind" and "required" in i.message for i in err.issues)


def test_unreadable_and_malformed_files(tmp_path):
    with pytest.raises(CaseFileError, match="cannot read"):
        load(tmp_path / "missing.toml")
    bad = tmp_path / "bad.toml"
    bad.write_text("[case\nkind = 1\n", encoding="utf-8")
    with pytest.raises(CaseFileError, match="not valid TOML"):
        load(bad)
