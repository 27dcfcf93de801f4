"""The report of a synthetic study: files written, numbers shown, pending and failed cases visible."""

from __future__ import annotations

import hashlib
import json
import os
import re
from html.parser import HTMLParser

import pandas as pd
import pytest
from report_synthetic import mark_done, point_id, richardson

from studyflow.errors import InputError
from studyflow.report import build_report


def _page(built) -> str:
    return built[1].index.read_text(encoding="utf-8")


def test_every_figure_exists_as_png_and_svg(built):
    _, result = built
    names = {f.name for f in result.figures}
    # per quantity, sweeps against both swept parameters, histories, fields and meshes
    assert {"value-dp", "error-dp", "profile-cf", "sweep-dp-vs-Re", "sweep-dp-vs-angle", "residuals-01",
            "meshes"} <= names
    for f in result.figures:
        assert f.png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n", f.png
        assert f.png.stat().st_size > 1000
        assert f.svg.stat().st_size > 200 and b"<svg" in f.svg.read_bytes()[:400]


def test_every_table_exists_as_csv_markdown_and_latex(built):
    _, result = built
    for t in result.tables:
        assert set(t.files) == {"CSV", "Markdown", "LaTeX"}
        back = pd.read_csv(t.files["CSV"])
        assert len(back) == len(t.frame)
        md = t.files["Markdown"].read_text()
        assert "|" in md and t.title in md
        tex = t.files["LaTeX"].read_text()
        assert "\\begin{" in tex and "\\end{" in tex


def test_key_numbers_of_the_study_appear(built):
    """Observed order, extrapolated value and U of each assessed point, recomputed here from the
    finest three values with the three-mesh formulas (Celik et al. 2008, eqs. 1-7)."""
    root, _ = built
    page = _page(built)
    results = pd.read_csv(root / "results" / "results.csv")
    dp = results[(results.quantity == "dp") & (results.status == "done")]
    for point, rows in dp.groupby("point"):
        if len(rows) < 3:
            continue
        f = rows.sort_values("level", ascending=False)["value"].to_numpy()
        r = richardson(f[0], f[1], f[2], 2.0)
        assert f"{r['order']:.4g}" in page, point
        assert f"{r['extrapolated']:.4g}" in page, point
        assert f"{1.25 * r['e_a'] / (2.0 ** r['order'] - 1.0) * abs(f[0]):.4g}" in page, point


def test_pending_and_failed_cases_are_shown(built):
    _, result = built
    page = _page(built)
    assert result.counts == {"done": 16, "failed": 1, "pending": 1}
    assert "1 of 18 cases are pending" in page
    assert "linear solver diverged" in page
    # the two points short of a finest case are listed as not assessed yet, with the case that holds them up
    waiting = page.split("Not assessed yet", 1)[1].split("</ul>", 1)[0]
    assert f"{point_id(1.0e5, 0.0)}--m2" in waiting and f"{point_id(1.0e5, 4.0)}--m2" in waiting
    assert waiting.count("<li>") == 2
    cases = pd.read_csv(result.index.parent / "tables" / "cases.csv")
    assert (cases.status == "pending").sum() == 1 and (cases.status == "failed").sum() == 1


def test_provenance_and_cautions(built):
    root, _ = built
    page = _page(built)
    assert hashlib.sha256((root / "study.yaml").read_bytes()).hexdigest() in page
    assert "studyflow-fv 0.1.0" in page  # the solver version as the solver wrote it into metrics.json
    assert "node-1, node-2, node-3" in page  # the hosts the step runner recorded per case
    for words in ("Verification is not validation", "review by a qualified engineer",
                  "Local codes and licensed practice govern"):
        assert words in page


class _Links(HTMLParser):
    def __init__(self):
        super().__init__()
        self.hrefs, self.srcs = [], []

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if tag == "a" and a.get("href") and not a["href"].startswith("#"):
            self.hrefs.append(a["href"])
        if tag == "img":
            self.srcs.append(a.get("src", ""))


def test_page_is_self_contained(built):
    """No URL leaves the folder: images are data URIs, links are relative files that exist."""
    _, result = built
    parser = _Links()
    parser.feed(_page(built))
    assert parser.srcs and all(s.startswith("data:image/png;base64,") for s in parser.srcs)
    for href in parser.hrefs:
        assert not re.match(r"^[a-z]+://", href), href
        assert (result.index.parent / href).is_file(), href
    assert "http://" not in _page(built).replace('http://www.w3.org/2000/svg', '')


def test_rebuild_while_running_shows_progress(tmp_path):
    """A study with no analysis yet and a case that has just finished: counts follow the case folders."""
    from report_synthetic import write_study

    root = write_study(tmp_path / "s", analysis=False, fields="none", res=[1.0e4, 3.0e4], angles=[0.0])
    first = build_report(root, fields=False)
    assert first.counts == {"done": 4, "failed": 1, "pending": 1}
    assert any("No analysis table yet" in n for n in first.notices)
    assert any("1 of 6 cases are pending" in n for n in first.notices)
    # collected an hour ago; then the pending case finishes (as the step runner records it)
    for table in (root / "results").iterdir():
        os.utime(table, (table.stat().st_mtime - 3600, table.stat().st_mtime - 3600))
    status = root / "cases" / f"{point_id(1.0e4, 0.0)}--m2" / ".studyflow" / "solve.status.json"
    status.write_text(json.dumps({"state": "ok", "wall_s": 3.0, "started": "2026-03-04T09:00:00Z",
                                  "ended": "2026-03-04T09:01:00Z"}))
    mark_done(status.parent.parent, "solve")
    second = build_report(root, fields=False)
    assert second.counts == {"done": 5, "failed": 1, "pending": 0}
    assert any("collect again" in n for n in second.notices)
    assert not any("pending" in n for n in second.notices)


def test_bad_report_block_names_file_key_and_value(tmp_path):
    from report_synthetic import write_study

    root = write_study(tmp_path / "s", fields="none", res=[1.0e4], angles=[0.0], failed=False, pending=False)
    text = (root / "study.yaml").read_text().replace("y: cf,", "y: nope, colour: red,")
    (root / "study.yaml").write_text(text)
    with pytest.raises(InputError) as err:
        build_report(root, fields=False)
    message = str(err.value)
    assert "study.yaml" in message and "report.references.cf.colour" in message and "'red'" in message


def test_reference_column_missing_names_the_column(tmp_path):
    from report_synthetic import write_study

    root = write_study(tmp_path / "s", fields="none", res=[1.0e4], angles=[0.0], failed=False, pending=False)
    (root / "study.yaml").write_text((root / "study.yaml").read_text().replace("y: cf,", "y: tau,"))
    with pytest.raises(InputError) as err:
        build_report(root, fields=False)
    assert "report.references.cf.y" in str(err.value) and "'tau'" in str(err.value)


def test_profiles_are_summarised_along_their_stations(built):
    """The profile sentence gives the mean local order over the stations (recomputed here from the
    finest three profiles with the three-mesh formula, Celik et al. 2008)."""
    root, result = built
    page = _page(built)
    assert "Along 12 stations the local observed order averages" in page
    results = pd.read_csv(root / "results" / "results.csv")
    cf = results[(results.quantity == "cf") & (results.point == point_id(1.0e4, 0.0))]
    f = {lev: g.sort_values("coord")["value"].to_numpy() for lev, g in cf.groupby("level")}
    orders = [richardson(f[2][i], f[1][i], f[0][i], 2.0)["order"] for i in range(12)]
    assert f"{sum(orders) / len(orders):.4g}" in page
    assert (result.index.parent / "tables" / "profile-summary.csv").is_file()


def test_a_study_with_nothing_collected_still_gets_a_report(tmp_path):
    from report_synthetic import write_study

    root = write_study(tmp_path / "s", res=[1.0e4], angles=[0.0], fields="none")
    for table in (root / "results").iterdir():
        table.unlink()
    result = build_report(root, fields=False)
    assert result.counts == {"done": 2, "failed": 1, "pending": 0}  # from the case folders alone
    assert any("No results have been collected yet" in n for n in result.notices)
    assert result.index.is_file() and "linear solver diverged" in result.index.read_text()


def test_cells_stand_in_for_h_when_sizes_are_unknown(tmp_path):
    from report_synthetic import write_study

    from studyflow.report.data import load
    from studyflow.report.figures.convergence import value_vs_size

    root = write_study(tmp_path / "s", res=[1.0e4], angles=[0.0], fields="none", failed=False, pending=False)
    results = pd.read_csv(root / "results" / "results.csv")
    results["h"] = float("nan")
    results.to_csv(root / "results" / "results.csv", index=False)
    data = load(root)
    fig = value_vs_size(data.results, None, "dp", "Pa", [point_id(1.0e4, 0.0)])
    ax = fig.axes[0]
    assert ax.get_xlabel() == "cells" and ax.get_xscale() == "log"
    xs = sorted(float(line.get_xdata()[0]) for line in ax.lines if line.get_marker() == "o")
    assert xs == [50.0, 200.0, 800.0]  # 10 x 5 cells on level 0, refined by 2 in each direction
