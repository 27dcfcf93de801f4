"""The json / yaml / toml collectors. Expected values are the ones each test writes into the file
(the file is the outside source: it is parsed independently by the standard library's json)."""

from __future__ import annotations

import json

import numpy as np
import pytest

from studyflow.collect.readers.keyed import parse_key
from studyflow.errors import CollectError
from collect_support import bind_one

METRICS = {"drag": {"cd": 0.0123, "cl": -0.5}, "stations": [{"x": 0.1, "cf": 3e-3}, {"x": 0.2, "cf": 2.5e-3},
                                                            {"x": 0.4, "cf": 2.0e-3}],
           "cf": {"x": [0.1, 0.2, 0.4], "values": [3e-3, 2.5e-3, 2.0e-3]}, "ok": True,
           "re.x": {"value": 7}, "res": [1e-2, 1e-4, 1e-6]}


def test_parse_key_forms() -> None:
    assert parse_key("drag.cd") == ("drag", "cd")
    assert parse_key("stations[2].cf") == ("stations", 2, "cf")
    assert parse_key("a[-1]") == ("a", -1)
    assert parse_key('["re.x"].value') == ("re.x", "value")
    assert parse_key("stations[*].cf") == ("stations", None, "cf")
    for bad in ("", "a..b", "a.", ".a", "a[x"):
        with pytest.raises(ValueError):
            parse_key(bad)


def test_scalar_by_key_path(read) -> None:
    doc = json.dumps(METRICS)
    r = read({"from": "json", "file": "metrics.json", "key": "drag.cd"}, {"metrics.json": doc})
    assert r.status == "ok" and r.reading.kind == "scalar"
    assert r.reading.final == json.loads(doc)["drag"]["cd"]
    r = read({"from": "json", "file": "metrics.json", "key": "stations[2].cf"})
    assert r.reading.final == 2.0e-3
    r = read({"from": "json", "file": "metrics.json", "key": "stations[-1].x"})
    assert r.reading.final == 0.4
    r = read({"from": "json", "file": "metrics.json", "key": '["re.x"].value'})
    assert r.reading.final == 7.0
    r = read({"from": "json", "file": "metrics.json", "key": "ok"})  # a flag reads as 1.0
    assert r.reading.final == 1.0


def test_profile_and_series(read) -> None:
    doc = json.dumps(METRICS)
    r = read({"from": "json", "file": "m.json", "key": "cf.values", "coord_key": "cf.x"}, {"m.json": doc})
    assert r.reading.kind == "profile"
    np.testing.assert_array_equal(r.reading.coord, [0.1, 0.2, 0.4])
    np.testing.assert_array_equal(r.reading.values, [3e-3, 2.5e-3, 2.0e-3])
    r = read({"from": "json", "file": "m.json", "key": "stations[*].cf", "coord_key": "stations[*].x"})
    np.testing.assert_array_equal(r.reading.coord, [0.1, 0.2, 0.4])
    r = read({"from": "json", "file": "m.json", "key": "res", "series": True})
    assert r.reading.kind == "history"
    np.testing.assert_array_equal(r.reading.coord, [1, 2, 3])  # counted from 1 when the file gives none
    assert r.reading.final == 1e-6


def test_missing_key_names_file_key_and_keys_there(read) -> None:
    r = read({"from": "json", "file": "m.json", "key": "drag.cdx"}, {"m.json": json.dumps(METRICS)})
    assert r.status == "failed"
    assert r.reason == "m.json: drag.cdx: missing key 'cdx' (keys there: cd, cl)"
    r = read({"from": "json", "file": "m.json", "key": "stations[5].cf"})
    assert r.reason == "m.json: stations[5].cf: index [5] out of range, the list at stations[5] has 3 items"


def test_non_finite_and_non_numbers_are_failures(read) -> None:
    # Python's json reads the NaN / Infinity literals some solvers write; they must not pass.
    files = {"m.json": '{"cd": NaN, "cl": Infinity, "cm": "n/a", "cs": null, "p": [1.0, -Infinity]}'}
    assert read({"from": "json", "file": "m.json", "key": "cd"}, files).reason == "m.json: cd: non-finite value (got nan)"
    assert read({"from": "json", "file": "m.json", "key": "cl"}).reason == "m.json: cl: non-finite value (got inf)"
    assert read({"from": "json", "file": "m.json", "key": "cm"}).reason == "m.json: cm: not a number (got 'n/a')"
    assert read({"from": "json", "file": "m.json", "key": "cs"}).reason == "m.json: cs: no value (null) (got None)"
    assert read({"from": "json", "file": "m.json", "key": "p"}).reason == \
        "m.json: p: non-finite value at station 1 (got -inf)"


def test_unparsable_and_missing_file(read) -> None:
    r = read({"from": "json", "file": "m.json", "key": "a"}, {"m.json": '{"a": 1,'})
    assert r.status == "failed" and r.reason.startswith("m.json: not valid JSON: ")
    r = read({"from": "json", "file": "none.json", "key": "a"})
    assert r.reason == "none.json: missing file"


def test_yaml_and_toml(read) -> None:
    r = read({"from": "yaml", "file": "out.yaml", "key": "forces.drag"}, {"out.yaml": "forces:\n  drag: 1.5e-2\n"})
    assert r.reading.final == 1.5e-2
    r = read({"from": "toml", "file": "out.toml", "key": "forces.lift[1]"},
             {"out.toml": "[forces]\nlift = [0.25, 0.5]\n"})
    assert r.reading.final == 0.5
    r = read({"from": "toml", "file": "bad.toml", "key": "a"}, {"bad.toml": "a = = 1\n"})
    assert r.reason.startswith("bad.toml: not valid TOML")


def test_rewritten_file_is_read_again(read, tmp_path) -> None:
    # The parse cache is keyed on size and mtime; a rewrite (a rerun) must be seen.
    read({"from": "json", "file": "m.json", "key": "a"}, {"m.json": '{"a": 1}'})
    import os
    p = tmp_path / "case" / "m.json"
    p.write_text('{"a": 22}')
    os.utime(p, ns=(p.stat().st_atime_ns, p.stat().st_mtime_ns + 10**9))
    assert read({"from": "json", "file": "m.json", "key": "a"}).reading.final == 22.0


def test_bad_options_name_key_path_and_value() -> None:
    with pytest.raises(CollectError) as err:
        bind_one({"from": "json", "file": "m.json", "key": "a..b"}, name="drag")
    text = str(err.value)
    assert "study.yaml: quantities.drag.key: empty name at position 2 (got 'a..b')" in text
    with pytest.raises(CollectError) as err:
        bind_one({"from": "json", "file": "m.json", "kye": "a"}, name="drag")
    assert "study.yaml: quantities.drag.key: Field required (got None)" in str(err.value)
    assert "study.yaml: quantities.drag.kye: unknown option for collector 'json' (got 'a')" in str(err.value)


def test_yaml_non_finite_literals_are_failures(read) -> None:
    # YAML 1.1 spells NaN and infinity .nan and .inf; they must be reported like JSON's NaN.
    files = {"o.yaml": "cd: .nan\ncl: -.inf\n"}
    assert read({"from": "yaml", "file": "o.yaml", "key": "cd"}, files).reason == "o.yaml: cd: non-finite value (got nan)"
    assert read({"from": "yaml", "file": "o.yaml", "key": "cl"}).reason == "o.yaml: cl: non-finite value (got -inf)"
