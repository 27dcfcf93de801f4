"""The command-line verbs assess-csv and assess (studyflow/cli/assess.py), end to end on small files."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from studyflow.analysis.levelcsv import read_level_csv
from studyflow.cli import assess as cli
from studyflow.errors import EXIT_ANALYSIS, EXIT_INVALID_INPUT, InputError

DATA = Path(__file__).resolve().parents[1] / "data"


def _run(argv: list[str]) -> int:
    return cli.main(argv)  # registers the verbs on a fresh parser and maps errors to exit codes


def test_assess_csv_celik_column_1(capsys, tmp_path):
    # Celik et al. (2008) Table 1, column 1 (inputs from memory): GCI_fine21 = 2.2 %, p = 1.53.
    out = tmp_path / "u.csv"
    assert _run(["assess-csv", str(DATA / "analysis_celik_col1.csv"), "--dim", "2", "-o", str(out)]) == 0
    text = capsys.readouterr().out
    assert "2.2%" in text and "1.53" in text
    assert "not validation" in text and "qualified engineer" in text and "local codes" in text
    table = pd.read_csv(out)
    assert table["order"].iat[0] == pytest.approx(1.53, abs=0.005)
    assert table["extrapolated"].iat[0] == pytest.approx(6.1685, abs=5e-5)


def test_assess_csv_reports_every_bad_row(capsys):
    code = _run(["assess-csv", str(DATA / "analysis_bad_levels.csv")])
    assert code == EXIT_ANALYSIS
    err = capsys.readouterr().err
    assert "analysis_bad_levels.csv: h, line 7" in err and "-0.3" in err  # non-positive size
    assert "value, line 8" in err and "nan" in err  # non-finite value
    assert "duplicate level for point 'Re=2e4'" in err
    assert "point 'Re=4e4', quantity 'value': fewer than two usable mesh levels (got 1)" in err


def test_assess_csv_missing_file_and_column(capsys, tmp_path):
    assert _run(["assess-csv", str(tmp_path / "nope.csv")]) == EXIT_INVALID_INPUT
    assert "no such file" in capsys.readouterr().err
    f = tmp_path / "x.csv"
    f.write_text("size,val\n1,2\n")
    with pytest.raises(InputError) as exc:
        read_level_csv(f)
    assert "cells: column missing" in str(exc.value) and "value: column missing" in str(exc.value)


def test_assess_csv_text_in_number_column(tmp_path):
    f = tmp_path / "t.csv"
    f.write_text("h,value\n0.1,1.0\n0.2,abc\n")
    with pytest.raises(InputError, match=r"t.csv: value, line 3: not a number \(got 'abc'\)"):
        read_level_csv(f)


def _study(tmp_path: Path) -> Path:
    root = tmp_path / "plate"
    (root / "tpl").mkdir(parents=True)
    (root / "tpl" / "case.txt").write_text("x\n")
    (root / "study.yaml").write_text(
        "title: Invented plate-drag demo for the analysis tests\n"
        "template: tpl\n"
        "parameters:\n  - kind: product\n    values: {Re: [1.0e4, 2.0e4]}\n"
        "mesh: {levels: 3, ratio: 2, counts: {nx: 8}}\n"
        "steps:\n  - name: solve\n    run: ['true']\n    writes: [metrics.json]\n"
        "quantities:\n  drag: {from: json, file: metrics.json, key: cd}\n"
        "  res: {from: csv, file: history.csv, column: res, series: true}\n"
        "iteration: {residuals: [res]}\n"
        "analysis: {formal_order: 2}\n")
    from studyflow.collect import write_tables
    from studyflow.collect.tables import ResultTables

    rows, hist, cases = [], [], []
    for point, re in (("Re-1e4", 1e4), ("Re-2e4", 2e4)):
        for level, h in enumerate((0.4, 0.2, 0.1)):
            case = f"{point}--m{level}"
            rows.append({"study": "plate", "case": case, "point": point, "level": level, "Re": re, "cells": (1 / h) ** 2, "h": h,
                             "quantity": "drag", "kind": "scalar", "coord": np.nan, "value": 0.05 + 0.02 * h**2, "unit": "-",
                             "status": "done", "converged": True, "reason": ""})
            hist += [{"study": "plate", "case": case, "point": point, "level": level, "quantity": "res", "iteration": i,
                          "value": 10.0 ** (-i / 10)} for i in range(61)]
            cases.append({"study": "plate", "case": case, "point": point, "level": level, "Re": re, "cells": (1 / h) ** 2, "h": h,
                              "status": "done", "reason": "", "wall_time": 1.0, "iterations": 60, "converged": True})
    write_tables(root, ResultTables(pd.DataFrame(rows), pd.DataFrame(hist), pd.DataFrame(cases)))
    return root


def test_assess_study_writes_both_tables(capsys, tmp_path):
    root = _study(tmp_path)
    assert _run(["assess", str(root)]) == 0
    text = capsys.readouterr().out
    assert "in the asymptotic range" in text and "residuals" in text and "Cautions" in text
    csv = pd.read_csv(root / "results" / "uncertainty.csv")
    pq = pd.read_parquet(root / "results" / "uncertainty.parquet")
    assert len(csv) == len(pq) == 2
    # Analytic data 0.05 + 0.02 h^2: order 2 and limit 0.05 exactly.
    assert csv["order"].to_numpy() == pytest.approx(2.0, rel=1e-9)
    assert pq["extrapolated"].to_numpy() == pytest.approx(0.05, rel=1e-9)
    assert set(pq["Re"]) == {1e4, 2e4}


def test_assess_study_without_results_is_a_clear_error(capsys, tmp_path):
    root = _study(tmp_path)
    for f in (root / "results").iterdir():
        f.unlink()
    assert _run(["assess", str(root)]) == EXIT_INVALID_INPUT
    assert "collect the study first" in capsys.readouterr().err
