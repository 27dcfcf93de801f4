"""Writing the tables: each file is replaced whole or not at all."""

from __future__ import annotations

import os
from pathlib import Path

import pandas as pd
import pytest

from studyflow.collect import collect_study, read_results, write_tables
from studyflow.collect import store
from studyflow.errors import CollectError
from collect_fakestudy import cases_of, good_outputs, make_study, write_case


@pytest.fixture
def study(tmp_path: Path):
    s = make_study(tmp_path / "channel")
    for i, c in enumerate(cases_of(s)[:3]):
        write_case(s, c, outputs=good_outputs(0.5 + i / 100))
    return s


def test_failure_mid_write_keeps_the_old_tables(study, monkeypatch) -> None:
    old = collect_study(study, write=True)
    before = {p.name: p.read_bytes() for p in (study.root / "results").iterdir()}
    write_case(study, cases_of(study)[3], outputs=good_outputs(0.7))
    new = collect_study(study)
    assert len(new.results) > len(old.results)

    # The rename that publishes a file fails (as if the process died or the disk filled there).
    real_replace = os.replace

    def failing_replace(src, dst):
        if str(dst).endswith("results.csv"):
            raise OSError(28, "No space left on device")
        return real_replace(src, dst)

    monkeypatch.setattr(os, "replace", failing_replace)
    with pytest.raises(OSError):
        write_tables(study.root, new)
    monkeypatch.setattr(os, "replace", real_replace)
    after = {p.name: p.read_bytes() for p in (study.root / "results").iterdir()}
    assert sorted(after) == sorted(before)  # no temporary file left behind
    assert after["results.csv"] == before["results.csv"]  # the old table, whole
    assert after["cases.csv"] == before["cases.csv"]  # not reached
    pd.testing.assert_frame_equal(pd.read_csv(study.root / "results" / "results.csv"),
                                  pd.read_csv(pd.io.common.BytesIO(before["results.csv"])))


def test_failure_while_writing_bytes_keeps_the_old_file(study, monkeypatch) -> None:
    collect_study(study, write=True)
    target = study.root / "results" / "histories.parquet"
    before = target.read_bytes()
    tables = collect_study(study)

    real_fdopen = os.fdopen

    class HalfWriter:
        def __init__(self, fh):
            self.fh = fh

        def __enter__(self):
            return self

        def __exit__(self, *exc):
            self.fh.close()
            return False

        def write(self, data):
            self.fh.write(data[: len(data) // 2])  # half of the bytes reach the disk, then it fails
            raise OSError(5, "Input/output error")

    monkeypatch.setattr(os, "fdopen", lambda fd, mode="r", *a, **k: HalfWriter(real_fdopen(fd, mode, *a, **k)))
    with pytest.raises(OSError):
        write_tables(study.root, tables)
    monkeypatch.undo()
    assert target.read_bytes() == before
    assert not [p for p in target.parent.iterdir() if p.name.endswith(".tmp")]
    read_results(study.root)  # every table still reads


def test_serialisation_happens_before_any_file_is_touched(study, monkeypatch) -> None:
    collect_study(study, write=True)
    before = {p.name: p.read_bytes() for p in (study.root / "results").iterdir()}
    write_case(study, cases_of(study)[3], outputs=good_outputs(0.7))
    tables = collect_study(study)
    real = store._parquet_bytes
    calls = []

    def broken(df):
        calls.append(1)
        if len(calls) == 2:  # the second table (results) cannot be converted
            raise ValueError("cannot convert")
        return real(df)

    monkeypatch.setattr(store, "_parquet_bytes", broken)
    with pytest.raises(ValueError):
        write_tables(study.root, tables)
    after = {p.name: p.read_bytes() for p in (study.root / "results").iterdir()}
    assert after == before  # not even the histories written before it


# --- reading one table back (the reader the report and the bundle share) ---

def test_one_table_reads_like_read_results(study) -> None:
    collect_study(study, write=True)
    whole = read_results(study.root)
    pd.testing.assert_frame_equal(store.read_table(study.root, "results"), whole.results)
    pd.testing.assert_frame_equal(store.read_table(study.root, "cases"), whole.cases)
    # The CSV holds the same table as the Parquet file (pyarrow is the reference for the dtypes).
    (study.root / "results" / "results.parquet").unlink()
    assert store.table_file(study.root, "results").name == "results.csv"
    pd.testing.assert_frame_equal(store.read_table(study.root, "results"), whole.results)


def test_a_missing_table_is_none_or_an_error_naming_the_file(study) -> None:
    assert store.table_file(study.root, "results") is None
    assert store.read_table(study.root, "uncertainty", required=False) is None
    with pytest.raises(CollectError) as err:
        store.read_table(study.root, "histories")
    assert str(study.root / "results" / "histories.csv") in str(err.value) and "collect the study first" in str(err.value)


def test_an_unreadable_table_is_an_error_naming_the_file(study) -> None:
    collect_study(study, write=True)
    bad = study.root / "results" / "results.parquet"
    bad.write_bytes(b"PAR1 cut short")  # a foreign or half-copied file, not a table
    for read in (lambda: store.read_table(study.root, "results", required=False), lambda: read_results(study.root)):
        with pytest.raises(CollectError) as err:
            read()
        assert str(bad) in str(err.value) and "cannot be read as a table" in str(err.value)


def test_a_table_of_another_layer_is_read_as_stored(study) -> None:
    out = study.root / "results"
    out.mkdir(exist_ok=True)
    # Point ids and words that look like numbers stay text; an empty reason stays missing (no restore).
    (out / "uncertainty.csv").write_text("point,quantity,coord,U,verdict,reason\n3,drag,,0.25,1,\n")
    table = store.read_table(study.root, "uncertainty", text=("verdict",))
    assert table["point"].tolist() == ["3"] and table["verdict"].tolist() == ["1"]
    assert table["U"].tolist() == [0.25] and pd.isna(table["reason"].iloc[0]) and pd.isna(table["coord"].iloc[0])
