"""The csv collector. Expected values are the ones each test writes into the table, cross-read
with the standard library's csv module where the table is delimited."""

from __future__ import annotations

import csv
import io

import numpy as np
import pytest

from studyflow.errors import CollectError
from collect_support import bind_one

HISTORY = "iter,mass,momx\n1,1.0e-1,2.0e-1\n2,1.0e-3,2.0e-3\n3,1.0e-5,2.0e-5\n4,1.0e-7,3.0e-7\n"
PROFILE = "# wall stations\nx;cf;y+\n0.1;3.0e-3;1.1\n0.2;2.5e-3;0.9\n0.4;2.0e-3;1.0\n"
SPACED = "  iter     mass      momx\n  1   1.0D-01   2.0D-01\n  2   1.0D-03   2.0D-03\n"


def _column(text: str, name: str) -> list[float]:
    return [float(row[name]) for row in csv.DictReader(io.StringIO(text))]


def test_row_by_index_negative_and_default_last(read) -> None:
    r = read({"from": "csv", "file": "h.csv", "column": "mass"}, {"h.csv": HISTORY})
    assert r.reading.final == _column(HISTORY, "mass")[-1]
    assert read({"from": "csv", "file": "h.csv", "column": "mass", "row": 0}).reading.final == 1.0e-1
    assert read({"from": "csv", "file": "h.csv", "column": "momx", "row": -2}).reading.final == 2.0e-5
    r = read({"from": "csv", "file": "h.csv", "column": "mass", "row": 9})
    assert r.reason == "h.csv: row: row 9 out of range, the table has 4 rows (got 9)"


def test_row_selected_by_another_column(read) -> None:
    r = read({"from": "csv", "file": "h.csv", "column": "momx", "where": {"iter": 3}}, {"h.csv": HISTORY})
    assert r.reading.final == 2.0e-5
    r = read({"from": "csv", "file": "h.csv", "column": "momx", "where": {"iter": 8}})
    assert r.reason == "h.csv: where iter = 8: no row matches"


def test_series_and_profile(read) -> None:
    r = read({"from": "csv", "file": "h.csv", "column": "mass", "series": True, "iteration_column": "iter"},
             {"h.csv": HISTORY})
    assert r.reading.kind == "history"
    np.testing.assert_array_equal(r.reading.values, _column(HISTORY, "mass"))
    np.testing.assert_array_equal(r.reading.coord, _column(HISTORY, "iter"))
    # Semicolons and a comment line: the delimiter is guessed from the header.
    r = read({"from": "csv", "file": "p.csv", "column": "cf", "coord_column": "x"}, {"p.csv": PROFILE})
    assert r.reading.kind == "profile"
    np.testing.assert_array_equal(r.reading.coord, [0.1, 0.2, 0.4])
    np.testing.assert_array_equal(r.reading.values, [3.0e-3, 2.5e-3, 2.0e-3])


def test_series_skips_iterations_with_no_recorded_value(read) -> None:
    # a monitor written every other iteration, or with no value at the first iterate
    text = "iteration,drag\n0,\n1,0.5\n2,\n3,0.25\n"
    r = read({"from": "csv", "file": "m.csv", "column": "drag", "series": True, "iteration_column": "iteration"},
             {"m.csv": text})
    np.testing.assert_array_equal(r.reading.values, [0.5, 0.25])
    np.testing.assert_array_equal(r.reading.coord, [1.0, 3.0])
    r = read({"from": "csv", "file": "m.csv", "column": "drag", "series": True})  # counted rows keep their count
    np.testing.assert_array_equal(r.reading.coord, [2.0, 4.0])
    r = read({"from": "csv", "file": "e.csv", "column": "drag", "series": True}, {"e.csv": "iteration,drag\n0,\n"})
    assert r.status == "failed" and "the history has no recorded values" in r.reason
    # outside a history an empty cell is still an error
    r = read({"from": "csv", "file": "m.csv", "column": "drag", "row": 0})
    assert r.status == "failed" and "not a number (got '')" in r.reason


def test_whitespace_table_with_fortran_exponents(read) -> None:
    # Fortran "D" exponents in solver output: common practice.
    r = read({"from": "csv", "file": "h.dat", "column": "momx", "series": True}, {"h.dat": SPACED})
    np.testing.assert_array_equal(r.reading.values, [2.0e-1, 2.0e-3])
    r = read({"from": "csv", "file": "n.dat", "column": 1, "header": False}, {"n.dat": "1 5.5\n2 6.5\n"})
    assert r.reading.final == 6.5


def test_failures_name_file_column_line_and_value(read) -> None:
    text = "iter,mass\n1,1e-3\n2,nan\n3,oops\n"
    r = read({"from": "csv", "file": "h.csv", "column": "mass", "row": 1}, {"h.csv": text})
    assert r.reason == "h.csv: column 'mass', line 3: non-finite value (got nan)"
    r = read({"from": "csv", "file": "h.csv", "column": "mass", "row": 2})
    assert r.reason == "h.csv: column 'mass', line 4: not a number (got 'oops')"
    r = read({"from": "csv", "file": "h.csv", "column": "mass", "series": True})
    assert r.status == "failed" and "not a number (got 'oops')" in r.reason
    r = read({"from": "csv", "file": "h.csv", "column": "energy"})
    assert r.reason == "h.csv: column: no column 'energy' (columns: iter, mass) (got 'energy')"


def test_conflicting_options_are_input_errors() -> None:
    with pytest.raises(CollectError) as err:
        bind_one({"from": "csv", "file": "h.csv", "column": "mass", "row": 1, "series": True}, name="res")
    assert "study.yaml: quantities.res: choose one of row, where, coord_column or series: true (got row, series)" \
        in str(err.value)
    with pytest.raises(CollectError) as err:
        bind_one({"from": "csv", "file": "h.csv", "column": "mass", "where": {"a": 1, "b": 2}}, name="res")
    assert "quantities.res.where: where takes exactly one column" in str(err.value)
