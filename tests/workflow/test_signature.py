"""The step runner's JSON and hashing without the json/hashlib modules give the same bytes as they do."""

from __future__ import annotations

import hashlib
import json

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from studyflow.workflow import signature as sig

scalars = st.none() | st.booleans() | st.integers(-10**30, 10**30) | st.floats(allow_nan=False, allow_infinity=False) | st.text()
documents = st.recursive(scalars, lambda kids: st.lists(kids, max_size=4) | st.dictionaries(st.text(), kids, max_size=4),
                         max_leaves=20)


@settings(max_examples=300, deadline=None)
@given(documents)
def test_dumps_and_loads_agree_with_the_json_module(doc) -> None:
    # Reference: the standard library's json module, with the options the signatures use.
    assert sig.dumps(doc) == json.dumps(doc, sort_keys=True, separators=(",", ":"), allow_nan=False)
    assert sig.dumps(doc, ", ", ": ") == json.dumps(doc, sort_keys=True, separators=(", ", ": "))
    assert sig.loads(json.dumps(doc)) == json.loads(json.dumps(doc))
    # the runner's own encoder (what a process without json, the step runner, uses)
    for seps in ((",", ":"), (", ", ": ")):
        out: list[str] = []
        sig._encode(doc, out, *seps)
        assert "".join(out) == json.dumps(doc, sort_keys=True, separators=seps, allow_nan=False)


def test_step_runner_does_not_import_json() -> None:
    import subprocess
    import sys

    code = ("import sys; sys.path.insert(0, sys.argv[1]); import signature as s; "
            "s.dumps({'a': [1, 2.5, None]}); print('json' in sys.modules)")
    out = subprocess.run([sys.executable, "-S", "-c", code, str(sig.__file__).rsplit("/", 1)[0]],
                         capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"


def test_loads_refuses_what_json_refuses() -> None:
    for bad in ("", "{", '{"a": 1} x', "[1,]", "{'a': 1}"):
        with pytest.raises(ValueError):
            sig.loads(bad)
    with pytest.raises(ValueError):
        sig.dumps({"x": float("nan")})


def test_hashes_match_hashlib(tmp_path) -> None:
    f = tmp_path / "f.bin"
    f.write_bytes(bytes(range(256)) * 5000)
    assert sig.sha_file(str(f)) == hashlib.sha256(f.read_bytes()).hexdigest()  # reference: hashlib
    assert sig.command_hash({"argv": ["a"], "reads": [], "writes": [], "upstream": None}) == hashlib.sha256(
        b'{"argv":["a"],"reads":[],"upstream":null,"writes":[]}').hexdigest()
