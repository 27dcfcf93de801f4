"""The report of the plate-drag demo study, run end to end with the bundled solver, with reference
curves named in the study file: the Blasius skin friction and the drag with leading-edge correction."""

from __future__ import annotations

import shutil
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

REPO = Path(__file__).resolve().parents[2]
RE_L = 1.0e4  # studies/plate-drag/study.yaml
# Blasius laminar flat plate: local cf = 0.664 / sqrt(Re_x); one-face drag with the leading-edge
# correction C_D = 1.328 / sqrt(Re_L) + 2.326 / Re_L (Blasius 1908; correction after Imai 1957; from memory)
CD_REFERENCE = 1.328 / np.sqrt(RE_L) + 2.326 / RE_L


@pytest.fixture(scope="module")
def plate(tmp_path_factory):
    from studyflow import api
    from studyflow.report import build_report

    root = tmp_path_factory.mktemp("plate")
    ignore = shutil.ignore_patterns("cases", "results", "report", ".studyflow", ".snakemake", "__pycache__")
    study = root / "studies" / "plate-drag"
    shutil.copytree(REPO / "studies" / "plate-drag", study, ignore=ignore)
    shutil.copytree(REPO / "templates" / "plate", root / "templates" / "plate", ignore=ignore)
    x = np.linspace(0.05, 1.0, 20)
    pd.DataFrame({"x_over_L": x, "cf": 0.664 / np.sqrt(RE_L * x)}).to_csv(study / "blasius.csv", index=False)
    # The test's own reference block, computed here, replaces the one the demo study ships.
    text = (study / "study.yaml").read_text()
    text = text[: text.index("\nreport:")] if "\nreport:" in text else text
    (study / "study.yaml").write_text(
        text.rstrip("\n") + "\nreport:\n  references:\n"
        "    cf: {file: blasius.csv, x: x_over_L, y: cf, label: Blasius}\n"
        f"    drag: {{value: {CD_REFERENCE:.6g}, label: Blasius with leading-edge correction}}\n")
    api.run(study, cores=2, progress=False)
    api.assess(study)
    return study, build_report(study)


def test_plate_report_numbers_and_reference(plate):
    study, result = plate
    page = result.index.read_text()
    unc = pd.read_csv(study / "results" / "uncertainty.csv")
    drag = unc[unc.quantity == "drag"].iloc[0]
    for value in (drag.order, drag.extrapolated, drag.U):
        assert f"{value:.4g}" in page
    assert f"Blasius with leading-edge correction ({CD_REFERENCE:.4g})" in page
    assert abs(drag.extrapolated - CD_REFERENCE) / CD_REFERENCE < 0.02  # what is shown is the right drag
    assert "squares: Blasius" in page  # the profile figure of cf carries the reference curve
    assert result.counts == {"done": 3, "failed": 0, "pending": 0}


def test_plate_report_fields_meshes_and_cases(plate):
    study, result = plate
    names = {f.name for f in result.figures}
    assert {"value-drag", "error-drag", "profile-cf", "residuals-01", "meshes", "field-u", "field-v",
            "field-p"} <= names
    assert "field-wall_shear" not in names  # only defined on the wall lines: nothing to draw on the cells
    cases = pd.read_csv(result.index.parent / "tables" / "cases.csv")
    collected = pd.read_csv(study / "results" / "cases.csv")
    assert list(cases.iterations) == list(collected.iterations)  # the solver's own iteration counts
    # residual drop in decades, log10(max |r| / |r_last|) (from the peak: a continuity residual can start
    # at zero), the worst of the three residuals (common practice)
    hist = pd.read_csv(study / "results" / "histories.csv").sort_values("iteration")
    hist = hist[hist.quantity.isin(["mass_residual", "xmom_residual", "ymom_residual"])]
    drops = hist.groupby(["case", "quantity"])["value"].agg(lambda v: np.log10(v.abs().max() / abs(v.iloc[-1])))
    # a residual that stayed at round-off (peak <= 1e-10 x the case's largest peak: the mass imbalance
    # of a Newton solve from a uniform start) is left out: its "drop" is noise (documented choice)
    peaks = hist.groupby(["case", "quantity"])["value"].agg(lambda v: v.abs().max())
    flat = peaks <= 1e-10 * peaks.groupby(level=0).transform("max")
    expected = drops[~flat].groupby(level=0).min()
    got = cases.set_index("case")["residual drop [decades]"]
    assert got.to_dict() == pytest.approx(expected.to_dict())
