"""Study-level collection: records and tables from a few hand-written case folders."""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from studyflow.collect import collect_case, collect_study, read_results
from studyflow.collect.tables import CASES_TAIL, HISTORY_COLUMNS, RESULT_TAIL
from studyflow.errors import CollectError
from collect_fakestudy import cases_of, good_outputs, make_study, write_case


@pytest.fixture
def study(tmp_path: Path):
    s = make_study(tmp_path / "channel")
    cs = cases_of(s)
    assert len(cs) == 6  # 2 points x 3 levels
    write_case(s, cs[0], outputs=good_outputs(0.51))
    write_case(s, cs[1], outputs=good_outputs(1 / 3, residuals=(1e-2, 1e-4)))  # not converged
    write_case(s, cs[2], outputs={**good_outputs(0.5), "metrics.json": '{"drag": {"cd": NaN}}'})
    write_case(s, cs[3], steps=("solve",), failed={"solve": "exit code 3"})
    write_case(s, cs[4], steps=("solve",), outputs=good_outputs(0.6))  # post not finished: half-done
    # cs[5] never rendered: pending
    return s


def test_results_table_columns_and_rows(study) -> None:
    t = collect_study(study)
    assert list(t.results.columns) == ["study", "case", "point", "level", "Re", *RESULT_TAIL]  # DEVELOPERS.md
    assert list(t.histories.columns) == list(HISTORY_COLUMNS)
    assert list(t.cases.columns) == ["study", "case", "point", "level", "Re", *CASES_TAIL]
    cases = t.cases.set_index("case")
    ids = [c.id for c in cases_of(study)]
    assert list(cases.index) == ids
    assert list(cases["status"]) == ["done", "done", "failed", "failed", "pending", "pending"]
    # Case 2 failed on its drag value, but its residuals did reach the tolerance: the flag says so.
    assert list(cases["converged"].astype(object).where(cases["converged"].notna(), None)) == \
        [True, False, True, None, None, None]
    assert cases.loc[ids[3], "reason"] == "step solve: exit code 3"
    assert cases.loc[ids[4], "reason"] == "step post not finished"
    assert cases.loc[ids[5], "reason"] == "not rendered yet"
    assert cases.loc[ids[2], "reason"] == "drag: metrics.json: drag.cd: non-finite value (got nan)"
    assert cases.loc[ids[0], "iterations"] == 3 and cases.loc[ids[0], "wall_time"] == 3.0

    r = t.results
    drag = r[(r.case == ids[0]) & (r.quantity == "drag")]
    assert len(drag) == 1 and drag.value.iloc[0] == 0.51 and drag.kind.iloc[0] == "scalar"
    assert drag.unit.iloc[0] == "N" and math.isnan(drag.coord.iloc[0])
    cf = r[(r.case == ids[0]) & (r.quantity == "cf")]
    assert list(cf.kind) == ["profile"] * 3 and list(cf.coord) == [0.0, 0.5, 1.0]
    res = r[(r.case == ids[0]) & (r.quantity == "res")]
    assert list(res.kind) == ["history"] and res.value.iloc[0] == pytest.approx(1e-7)
    # Every case keeps a row per quantity, whatever its status: nothing is dropped.
    assert set(r.groupby("case").quantity.nunique()) == {3}
    bad = r[(r.case == ids[2]) & (r.quantity == "drag")]
    assert bad.status.iloc[0] == "failed" and math.isnan(bad.value.iloc[0])
    other = r[(r.case == ids[2]) & (r.quantity == "cf")]
    assert set(other.status) == {"failed"} and set(other.reason) == {cases.loc[ids[2], "reason"]}
    # Level, parameters, cells and h come from the mesh design: nx*ny cells, h = (2*1/cells)^(1/2).
    row = t.cases.iloc[1]
    assert row.level == 1 and row.Re == 100 and row.cells == 16 * 8
    assert row.h == pytest.approx((2.0 * 1.0 / (16 * 8)) ** 0.5)  # Celik et al. 2008, eq. (1)

    h = t.histories
    assert list(h[h.case == ids[0]].iteration) == [1, 2, 3]
    assert set(h.case) == {ids[0], ids[1], ids[2]}


def test_records_written_and_half_done_case_not_read(study) -> None:
    collect_study(study)
    ids = [c.id for c in cases_of(study)]
    rec = json.loads((study.root / "cases" / ids[0] / ".studyflow" / "record.json").read_text())
    assert rec["status"] == "done" and rec["quantities"]["drag"]["values"] == [0.51]
    assert not (study.root / "cases" / ids[4] / ".studyflow" / "record.json").exists()
    one = collect_case(study, ids[4])
    assert one.status == "pending" and not one.quantities


def test_record_reused_until_an_output_changes(study, monkeypatch) -> None:
    ids = [c.id for c in cases_of(study)]
    collect_study(study)
    from studyflow.collect import case as case_mod

    calls = []
    real = case_mod.read_quantity
    monkeypatch.setattr(case_mod, "read_quantity", lambda *a, **k: calls.append(a) or real(*a, **k))
    collect_study(study)
    assert calls == []  # every record reused
    p = study.root / "cases" / ids[0] / "metrics.json"
    p.write_text(json.dumps({"drag": {"cd": 0.52}}))
    import os
    os.utime(p, ns=(p.stat().st_atime_ns, p.stat().st_mtime_ns + 10**9))
    t = collect_study(study)
    assert len(calls) == 3  # only the changed case was read again (3 quantities)
    r = t.results
    assert r[(r.case == ids[0]) & (r.quantity == "drag")].value.iloc[0] == 0.52


def test_cells_from_a_quantity(tmp_path: Path) -> None:
    mesh = {"list": [{"name": 1}, {"name": 2}], "cells_from": "ncells", "measure": 2.0, "dim": 2}
    s = make_study(tmp_path / "s", mesh=mesh, quantities={
        "ncells": {"from": "json", "file": "metrics.json", "key": "mesh.cells"},
        "drag": {"from": "json", "file": "metrics.json", "key": "drag"}}, iteration=None,
        parameters=[{"kind": "table", "points": [{"id": "a", "Re": 1}]}])
    cs = cases_of(s)
    write_case(s, cs[0], outputs={"metrics.json": json.dumps({"mesh": {"cells": 800}, "drag": 1.0})})
    write_case(s, cs[1], outputs={"metrics.json": json.dumps({"mesh": {"cells": 3200}, "drag": 0.9})})
    t = collect_study(s)
    # h = (measure / N)^(1/dim), Celik et al. 2008, eq. (1): (2/800)^(1/2) = 0.05, (2/3200)^(1/2) = 0.025.
    np.testing.assert_allclose(t.cases.h, [0.05, 0.025])
    np.testing.assert_array_equal(t.cases.cells, [800, 3200])
    assert set(t.results.h.round(12)) == {0.05, 0.025}


def test_convergence_flag_wins(tmp_path: Path) -> None:
    s = make_study(tmp_path / "s", quantities={
        **make_study(tmp_path / "t").model_dump(by_alias=True)["quantities"],
        "conv": {"from": "json", "file": "metrics.json", "key": "converged"}},
        iteration={"residuals": ["res"], "tolerance": 1e-6, "flag": "conv"})
    cs = cases_of(s)
    out = good_outputs(0.5, residuals=(1e-2, 1e-3))  # residual criterion says no
    out["metrics.json"] = json.dumps({"drag": {"cd": 0.5}, "converged": True})
    write_case(s, cs[0], outputs=out)
    assert collect_case(s, cs[0].id).converged is True


def test_write_and_read_back(study, tmp_path: Path) -> None:
    t = collect_study(study, write=True)
    for name in ("results.csv", "results.parquet", "histories.csv", "histories.parquet", "cases.csv"):
        assert (study.root / "results" / name).is_file()
    back = read_results(study.root)
    pd.testing.assert_frame_equal(back.results, t.results, check_dtype=False)
    pd.testing.assert_frame_equal(back.histories, t.histories, check_dtype=False)
    pd.testing.assert_frame_equal(back.cases, t.cases, check_dtype=False)
    # The CSV alone gives the same table (Parquet removed).
    (study.root / "results" / "results.parquet").unlink()
    csv_back = read_results(study.root).results
    pd.testing.assert_frame_equal(csv_back, t.results, check_dtype=False)
    # Bit-exact numbers through CSV, e.g. 1/3 (the value of case 1's drag), not 17-digit approximations.
    np.testing.assert_array_equal(csv_back.value.to_numpy(), t.results.value.to_numpy())
    assert (csv_back.value == 1 / 3).sum() == 1
    with pytest.raises(CollectError, match="collect the study first"):
        read_results(tmp_path / "nowhere")


def test_only_named_cases_and_unknown_case(study) -> None:
    ids = [c.id for c in cases_of(study)]
    t = collect_study(study, cases=[ids[1]])
    assert list(t.cases.case) == [ids[1]]
    with pytest.raises(CollectError, match="no such case in this study"):
        collect_study(study, cases=["no-such-case"])


def test_invalid_quantity_stops_before_reading(tmp_path: Path) -> None:
    s = make_study(tmp_path / "s", quantities={"drag": {"from": "json", "file": "m.json", "keys": "a"},
                                               "lift": {"from": "nosuch", "file": "m.json"}}, iteration=None)
    with pytest.raises(CollectError) as err:
        collect_study(s)
    text = str(err.value)
    assert f"{s.file}: quantities.drag.key: Field required" in text
    assert f"{s.file}: quantities.drag.keys: unknown option for collector 'json' (got 'a')" in text
    assert f"{s.file}: quantities.lift.from: no such collector; known: csv, field, json, log, toml, yaml" in text
