"""The log collector. Expected values are those the test writes into the log text."""

from __future__ import annotations

import numpy as np
import pytest

from studyflow.errors import CollectError
from collect_support import bind_one

LOG = """solver start
iter 1  residual 1.0e-02  CL = 0.30
iter 2  residual 1.0e-04  CL = 0.31
iter 3  residual 1.0D-06  CL = 0.315
done
"""


def test_last_first_and_all(read) -> None:
    files = {"logs/solve.log": LOG}
    r = read({"from": "log", "file": "logs/solve.log", "pattern": r"CL = (\S+)"}, files)
    assert r.reading.kind == "scalar" and r.reading.final == 0.315
    r = read({"from": "log", "file": "logs/solve.log", "pattern": r"CL = (\S+)", "match": "first"})
    assert r.reading.final == 0.30
    r = read({"from": "log", "file": "logs/solve.log", "pattern": r"iter (?P<it>\d+)\s+residual (?P<value>\S+)",
              "match": "all", "iteration_group": "it"})
    assert r.reading.kind == "history"
    np.testing.assert_array_equal(r.reading.coord, [1, 2, 3])
    np.testing.assert_array_equal(r.reading.values, [1.0e-2, 1.0e-4, 1.0e-6])
    r = read({"from": "log", "file": "logs/solve.log", "pattern": r"residual (\S+)", "series": True})
    assert r.reading.kind == "history" and r.reading.values.size == 3


def test_no_match_and_bad_numbers_are_reported(read) -> None:
    files = {"run.log": "CD = 0.1\nCD = -nan\nCM = ***\n"}
    r = read({"from": "log", "file": "run.log", "pattern": r"CL = (\S+)"}, files)
    assert r.reason == "run.log: pattern 'CL = (\\\\S+)': no line matches"
    r = read({"from": "log", "file": "run.log", "pattern": r"CD = (\S+)"})
    assert r.reason == "run.log: pattern 'CD = (\\\\S+)', line 2: non-finite value (got nan)"
    r = read({"from": "log", "file": "run.log", "pattern": r"CM = (\S+)"})
    assert r.reason == "run.log: pattern 'CM = (\\\\S+)', line 3: not a number (got '***')"


def test_pattern_checked_before_anything_runs() -> None:
    for options, message in [
        ({"pattern": "CL = \\S+"}, "quantities.lift.pattern: the pattern needs a capture group"),
        ({"pattern": "CL = ("}, "quantities.lift.pattern: not a regular expression"),
        ({"pattern": "(a)(b)"}, "quantities.lift: the pattern has several groups"),
        ({"pattern": "(a)", "group": 3}, "quantities.lift: group 3 does not exist"),
        ({"pattern": "(a)", "match": "middle"}, "quantities.lift.match: Input should be 'last', 'first' or 'all'"),
    ]:
        with pytest.raises(CollectError) as err:
            bind_one({"from": "log", "file": "x.log", **options}, name="lift")
        assert message in str(err.value), str(err.value)
