"""Build the study report: figures, tables and one HTML page in ``<study>/report/``."""

from __future__ import annotations

import os
from collections import Counter
from dataclasses import dataclass, field
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

import pandas as pd

from .. import __version__
from ..analysis import profile_summary
from ..errors import InputError, Problem
from ..fsutil import atomic_write_text
from . import fields as fieldpics
from . import page
from .data import StudyData, load
from .export import FigureFile, TableFile, save_figure, save_table, slug, svg_wrapping_png
from .figures.common import fmt
from .figures.convergence import error_vs_size, value_vs_size
from .figures.histories import residual_pages
from .figures.profiles import load_reference, profile_panels
from .figures.sweeps import quantity_vs_parameter, swept
from .provenance import failures, provenance
from .tables import case_table, uncertainty_summary
from .words import profile_sentence, sentence, verdict_class

MAX_VERDICT_CARDS = 24
MAX_PROFILE_POINTS = 6


@dataclass
class ReportResult:
    index: Path
    figures: list[FigureFile] = field(default_factory=list)
    tables: list[TableFile] = field(default_factory=list)
    notices: list[str] = field(default_factory=list)
    counts: dict[str, int] = field(default_factory=dict)


def _points_in_order(frame: pd.DataFrame) -> list[str]:
    return list(dict.fromkeys(frame["point"].astype(str)))


def _unit(data: StudyData, quantity: str) -> str | None:
    if quantity in data.settings.units:
        return data.settings.units[quantity]
    if data.results is not None and "unit" in data.results:
        units = data.results.loc[data.results["quantity"] == quantity, "unit"].dropna().astype(str)
        if len(units):
            return units.iloc[0]
    return None


def _scalar_unc(data: StudyData, quantity: str) -> pd.DataFrame | None:
    unc = data.uncertainty
    if unc is None or unc.empty:
        return None
    rows = unc[unc["quantity"].astype(str) == quantity]
    if "coord" in rows:
        rows = rows[pd.to_numeric(rows["coord"], errors="coerce").isna()]
    return rows


def _notices(data: StudyData, counts: Counter, total: int) -> list[str]:
    out = []
    if total == 0:
        out.append("No case has been rendered yet: this report has nothing to show.")
    if counts.get("pending"):
        out.append(f"The study is not finished: {counts.get('pending')} of {total} cases are pending. "
                   "Figures and tables show the finished cases only; rebuild the report when more are done.")
    if data.results is None and total:
        out.append("No results have been collected yet: collect the study's outputs to see its quantities.")
    elif data.uncertainty is None and data.results is not None:
        out.append("No analysis table yet: the extrapolated values and uncertainties are missing.")
    stamps = [c.status_mtime for c in data.cases.values() if c.status_mtime is not None]
    res = data.table_files.get("results")
    if res is not None and stamps and max(stamps) > res.stat().st_mtime + 1.0:
        out.append("Some cases finished after the results were collected: collect again to include them.")
    return out


class _Builder:
    def __init__(self, data: StudyData, out: Path, renderer_argv: list[str] | None):
        self.data = data
        self.out = out
        self.figdir = out / "figures"
        self.tabdir = out / "tables"
        self.renderer_argv = renderer_argv
        self.figures: list[FigureFile] = []

    def save(self, fig, name: str, title: str, caption: str, section: str, note: str = "") -> FigureFile:
        ff = save_figure(fig, self.figdir, name, title, caption, note)
        self.figures.append(ff)
        return ff

    # --- quantities --------------------------------------------------------------------------------
    def result_quantities(self, res: pd.DataFrame) -> list[str]:
        """Quantities that get a section: those the analysis assesses (``analysis.quantities``) and those
        with a reference curve, else every quantity but histories, residuals, the convergence flag and
        the cell count behind h."""
        s = self.data.settings
        names = list(dict.fromkeys(res["quantity"].astype(str)))
        if s.assessed is not None:
            keep = set(s.assessed) | set(s.references)
            return [q for q in names if q in keep]
        return [q for q in names if q not in set(s.not_results)]

    def quantity_sections(self) -> list[dict[str, Any]]:
        data, res = self.data, self.data.results
        if res is None or res.empty:
            return []
        sections = []
        formal = data.settings.formal_order
        for quantity in self.result_quantities(res):
            rows = res[res["quantity"].astype(str) == quantity]
            kind = str(rows["kind"].iloc[0])
            unit = _unit(data, quantity)
            all_points = _points_in_order(rows)
            unc = _scalar_unc(data, quantity) if kind != "profile" else None
            sec = {"id": f"q-{slug(quantity)}", "name": quantity, "unit": unit if unit and unit != "-" else "",
                   "figures": [], "sentences": [], "more": ""}
            limit = data.settings.max_points if kind != "profile" else MAX_PROFILE_POINTS
            points = all_points[:limit]
            if len(all_points) > len(points):
                sec["more"] = (f"Figures show the first {len(points)} of {len(all_points)} points; "
                               "every point is in the uncertainty table.")
            ref = data.settings.references.get(quantity)
            ref_frame = load_reference(ref, str(data.settings.study_file)) if ref and ref.file else None
            if kind == "profile":
                on_profile = ref_frame is not None and ref.x not in data.parameters
                f = profile_panels(res, data.uncertainty, quantity, unit, points, ref_frame if on_profile else None,
                                   ref.label if ref else "reference", ref.point if ref else None)
                sec["figures"].append(self.save(
                    f, f"profile-{slug(quantity)}", f"{quantity} along its stations",
                    "One line per mesh level, the extrapolated profile and the finest-mesh band ± U"
                    + (f"; squares: {ref.label}." if on_profile else "."), sec["id"]))
            else:
                value_ref = ref if ref is not None and ref.value is not None else None
                f = value_vs_size(res, unc, quantity, unit, points, value_ref)
                sec["figures"].append(self.save(
                    f, f"value-{slug(quantity)}", f"{quantity} against mesh size",
                    "Dots: the value on each mesh level (darker is finer). Star and dashed line: the extrapolated "
                    "value at h = 0. Band: the finest-mesh value ± U."
                    + (f" Dash-dotted line: {value_ref.label} ({fmt(value_ref.value)})." if value_ref else ""),
                    sec["id"]))
                f = error_vs_size(res, unc, quantity, formal, all_points[:60])
                sec["figures"].append(self.save(
                    f, f"error-{slug(quantity)}", f"{quantity}: error against mesh size",
                    "|value - extrapolated| on log-log axes; the dotted line has the slope of the formal order"
                    + (f" p = {fmt(formal, 3)}." if formal else "."), sec["id"]))
            if kind == "profile" and data.uncertainty is not None and not data.uncertainty.empty:
                prof = profile_summary(data.uncertainty)
                prof = prof[prof["quantity"].astype(str) == quantity]
                for r in prof.head(limit).to_dict("records"):
                    sec["sentences"].append({"point": r["point"], "text": profile_sentence(pd.Series(r), unit),
                                             "verdict": "profile", "cls": "neutral"})
            if unc is not None:
                for r in unc.head(limit).to_dict("records"):
                    sec["sentences"].append({"point": r["point"], "text": sentence(pd.Series(r), unit, formal),
                                             "verdict": r.get("verdict", "-"), "cls": verdict_class(r.get("verdict"))})
            sections.append(sec)
        return sections

    # --- sweeps ------------------------------------------------------------------------------------
    def sweeps(self) -> list[FigureFile]:
        data, res = self.data, self.data.results
        if res is None or res.empty:
            return []
        params = [p for p in data.parameters if p in res.columns]
        scalars = res[res["kind"].astype(str) != "profile"]
        swept_params = swept(scalars, params)
        out = []
        for quantity in self.result_quantities(scalars):
            unit = _unit(data, quantity)
            for p in swept_params:
                others = [o for o in swept_params if o != p]
                ref = data.settings.references.get(quantity)
                ref_frame = None
                if ref is not None and ref.file is not None and ref.x == p:
                    ref_frame = load_reference(ref, str(data.settings.study_file))
                f = quantity_vs_parameter(res, _scalar_unc(data, quantity), quantity, unit, p, others,
                                          ref_frame, ref.label if ref else "")
                out.append(self.save(f, f"sweep-{slug(quantity)}-vs-{slug(p)}", f"{quantity} against {p}",
                                     "One curve per mesh level; stars: extrapolated values; error bars on the "
                                     "finest level: ± U from the analysis.", "sweeps"))
        return out

    # --- histories ---------------------------------------------------------------------------------
    def histories(self, cases: list[str], status: dict[str, str]) -> list[FigureFile]:
        hist = self.data.histories
        if hist is None or hist.empty:
            return []
        residuals = list(self.data.settings.residuals)
        pages = residual_pages(hist, cases, residuals, self.data.settings.tolerance, status)
        out = []
        for i, f in enumerate(pages, start=1):
            title = "Residual histories" + (f", page {i} of {len(pages)}" if len(pages) > 1 else "")
            tol = self.data.settings.tolerance
            out.append(self.save(f, f"residuals-{i:02d}", title,
                                 "One panel per case, log scale" +
                                 (f"; dashed line: the tolerance {fmt(tol, 3)}." if tol else "."), "iterations"))
        return out

    # --- fields ------------------------------------------------------------------------------------
    def field_case(self, table: pd.DataFrame):
        done = table[table["status"] == "done"]
        if done.empty:
            return None, []
        points = _points_in_order(done)
        for point in points:
            rows = done[done["point"].astype(str) == point].sort_values("level")
            states = [self.data.cases.get(str(c)) for c in rows["case"]]
            states = [s for s in states if s is not None and s.folder is not None]
            declared = self.data.settings.field_files + self.data.settings.mesh_files
            files = [(s, fieldpics.find_mesh_file(s.folder, declared)) for s in states]
            files = [(s, f) for s, f in files if f is not None]
            if files:
                return files[-1], files
        return None, []

    def start_fields(self, table: pd.DataFrame) -> dict[str, Any]:
        """Choose the case, read its fields and start the off-screen renderer (it runs meanwhile)."""
        finest, family = self.field_case(table)
        if finest is None:
            return {"case": "", "notes": ["No finished case has a field or mesh file (VTU, VTK, XDMF, gmsh MSH) to draw."]}
        state, path = finest
        work: dict[str, Any] = {"case": state.case, "state": state, "path": path, "family": family, "notes": []}
        try:
            work["mesh"] = fieldpics.read_mesh(path)
        except Exception as exc:  # meshio raises many reader-specific types
            work["notes"].append(f"The field file {path.name} of {state.case} could not be read: {exc}")
            return work
        arrays = fieldpics.choose_arrays(work["mesh"])
        if not arrays:
            work["notes"].append(f"{path.name} of {state.case} holds a mesh but no field arrays: no field pictures.")
        view = self.data.settings.view
        work["jobs"] = [fieldpics.PictureJob(path, name, assoc, self.figdir / f"field-{slug(name)}.png",
                                             name if view is None else f"{name}: {fieldpics.window_note(view)}", view)
                        for name, assoc in arrays]
        self.figdir.mkdir(parents=True, exist_ok=True)
        if work["jobs"]:
            work["pending"] = fieldpics.start_pictures(work["jobs"], argv=self.renderer_argv)
        return work

    def finish_fields(self, work: dict[str, Any]) -> tuple[str, list[FigureFile], list[str]]:
        notes: list[str] = work["notes"]
        if "state" not in work:
            return work["case"], [], notes
        state, path, out = work["state"], work["path"], []
        status = work["pending"].result() if "pending" in work else {}
        for job in work.get("jobs", []):
            title = f"{job.array} on {state.case}"
            caption = f"{job.association} data '{job.array}' from {path.name}" + (
                f", in the window {fieldpics.window_note(job.window)} (report.view)." if job.window else ".")
            name = job.png.stem
            if status.get(job.png) == "ok":
                svg = job.png.with_suffix(".svg")
                svg_wrapping_png(job.png, svg)
                ff = FigureFile(name, title, caption + " Drawn off-screen with pyvista.", job.png, svg)
                self.figures.append(ff)
                out.append(ff)
            else:
                why = status.get(job.png, "not attempted")
                note = f"The pyvista picture could not be drawn ({why}); shown with matplotlib instead."
                try:
                    fig = fieldpics.fallback_picture(work["mesh"], job.array, job.association, title, job.window)
                    out.append(self.save(fig, name, title, caption, "fields", note))
                except Exception as exc:  # a field we cannot draw must not cost the report
                    notes.append(f"{title}: could not be drawn ({why}); the fallback failed too: {exc}")
        meshes = []
        for s, f in work["family"]:
            try:
                meshes.append((f"level {s.level}", fieldpics.read_mesh(f)))
            except Exception as exc:  # meshio raises many reader-specific types
                notes.append(f"The mesh of {s.case} could not be read from {f.name}: {exc}")
        if meshes:
            fig = fieldpics.mesh_family(meshes)
            out.append(self.save(fig, "meshes", f"Mesh family of point {state.point}",
                                 "The meshes of one point, coarse to fine: whole (top) and the same detail "
                                 "window of each (bottom, marked in orange above).", "fields"))
        return state.case, out, notes


def build_report(study: str | os.PathLike | Any, out: str | os.PathLike | None = None, *, fields: bool = True,
                 renderer_argv: list[str] | None = None) -> ReportResult:
    """Build ``<study>/report/index.html`` with every figure (PNG, SVG) and table (CSV, Markdown, LaTeX).

    Works on a study at any stage: cases still pending are counted and shown as pending.
    ``fields=False`` skips the field pictures and the mesh family; ``renderer_argv`` replaces the
    command of the off-screen field renderer (tests use it to simulate a crash).
    """
    root = Path(getattr(study, "file", None) or study)  # a loaded Study, its file or its folder
    if root.is_file():
        root = root.parent
    if not root.is_dir():
        raise InputError(Problem(str(root), "", str(study), "is not a study folder"))
    data = load(root)
    out_dir = Path(out) if out is not None else data.root / "report"
    b = _Builder(data, out_dir, renderer_argv)
    built = datetime.now(UTC)

    ctable = case_table(data)
    counts = Counter(ctable["status"].astype(str))
    total = len(ctable)
    notices = _notices(data, counts, total)

    # the field renderer (a child process) works while the matplotlib figures are drawn here
    skipped = {"case": "", "notes": ["Field pictures were not requested for this build."]}
    work = b.start_fields(ctable) if fields else skipped
    try:
        quantities = b.quantity_sections()
        sweep_figs = b.sweeps()
        cases_sorted = ctable["case"].astype(str).tolist()
        hist_figs = b.histories(cases_sorted, dict(zip(cases_sorted, ctable["status"].astype(str))))
    except BaseException:
        if "pending" in work:
            work["pending"].cancel()  # a bad reference file or Ctrl-C: leave no renderer behind
        raise
    fields_case, field_figs, field_notes = b.finish_fields(work)

    tables: list[TableFile] = []
    summary = uncertainty_summary(data)
    tables.append(save_table(summary, b.tabdir, "uncertainty-summary", "Uncertainty of scalar quantities"))
    tables.append(save_table(ctable, b.tabdir, "cases", "Cases"))
    if data.uncertainty is not None:
        prof = profile_summary(data.uncertainty)
        if len(prof):
            tables.append(save_table(prof, b.tabdir, "profile-summary", "Uncertainty along profiles"))
        tables.append(save_table(data.uncertainty, b.tabdir, "uncertainty-full",
                                 "Uncertainty, every point, quantity and station"))
    if data.results is not None:
        tables.append(save_table(data.results, b.tabdir, "results", "Collected results"))

    context = _page_context(data, b, out_dir, built, ctable, counts, total, notices, summary, tables, quantities,
                            sweep_figs, hist_figs, fields_case, field_figs, field_notes)
    index = out_dir / "index.html"
    atomic_write_text(index, page.render(context))
    _remove_stale(b.figdir, {p for f in b.figures for p in (f.png, f.svg)})
    _remove_stale(b.tabdir, {p for t in tables for p in t.files.values()})
    return ReportResult(index=index, figures=b.figures, tables=tables, notices=notices,
                        counts={k: counts.get(k, 0) for k in ("done", "failed", "pending")})


def _page_context(data: StudyData, b: _Builder, out_dir: Path, built: datetime, ctable: pd.DataFrame,
                  counts: Counter, total: int, notices: list[str], summary: pd.DataFrame, tables: list[TableFile],
                  quantities: list[dict[str, Any]], sweep_figs: list[FigureFile], hist_figs: list[FigureFile],
                  fields_case: str, field_figs: list[FigureFile], field_notes: list[str]) -> dict[str, Any]:
    """Everything the page template needs, as plain values (numbers already formatted)."""
    sources = page.image_sources([f.png for f in b.figures], out_dir)

    def fig_ctx(f: FigureFile) -> dict[str, Any]:
        w, h = page.png_size(f.png)
        return {"id": f"fig-{f.name}", "src": sources[f.png], "title": f.title, "caption": f.caption,
                "note": f.note, "png": f.png.relative_to(out_dir).as_posix(),
                "svg": f.svg.relative_to(out_dir).as_posix(), "width": w, "height": h}

    for q in quantities:
        q["figures"] = [fig_ctx(f) for f in q["figures"]]
    num = iter(f"{i:02d}" for i in range(2, 99))
    for q in quantities:
        q["num"] = next(num)
    verdicts = []
    for r in summary.head(MAX_VERDICT_CARDS).to_dict("records"):
        fine, big_u = r.get("value_fine"), r.get("U")
        pct = fmt(100 * float(big_u) / abs(float(fine)), 3) if page.finite(big_u) and page.finite(fine) and float(fine) else ""
        unit = _unit(data, str(r["quantity"]))
        verdicts.append({"quantity": r["quantity"], "point": r["point"], "unit": "" if unit in (None, "-") else unit,
                         "extrapolated": fmt(r.get("extrapolated")), "order": fmt(r.get("order")),
                         "value_fine": fmt(fine), "U": fmt(big_u), "U_pct": pct, "gci_fine": fmt(r.get("gci_fine")),
                         "verdict": r.get("verdict", "-"), "cls": verdict_class(r.get("verdict"))})
    tally = []
    if len(summary) and "verdict" in summary:
        for quantity, g in summary.groupby("quantity", sort=False):
            counts_q = g["verdict"].astype(str).value_counts()
            tally.append({"quantity": quantity, "n": len(g),
                          "chips": [{"verdict": v, "count": int(n), "cls": verdict_class(v)} for v, n in counts_q.items()]})
    assessed_points = set(summary["point"].astype(str)) if len(summary) else set()
    waiting = []
    for point, g in ctable.groupby(ctable["point"].astype(str), sort=False):
        open_cases = g[g["status"].astype(str) != "done"]
        if point not in assessed_points and len(open_cases):
            waiting.append({"point": point, "cases": [
                {"case": r["case"], "status": r["status"], "reason": r["reason"]} for r in open_cases.to_dict("records")]})
    table_ctx = []
    for t in tables:
        shown = t.name in ("uncertainty-summary", "profile-summary", "cases")
        if set(t.files) == {"CSV"}:
            t.title += f" ({len(t.frame)} rows: CSV only, too long to typeset)"
        table_ctx.append({"id": f"t-{t.name}", "title": t.title,
                          "files": [(k, v.relative_to(out_dir).as_posix()) for k, v in t.files.items()],
                          "html": page.table_html(t.frame) if shown and t.name != "cases" else
                          ("" if not shown else "<p class=\"counts\">Shown above under Cases.</p>")})
    sweeps_num = next(num) if sweep_figs else ""
    iter_num, fields_num, tables_num, prov_num, caution_num = (next(num) for _ in range(5))
    sections = [{"id": "verdict", "title": "Verdict", "subs": []}]
    sections += [{"id": q["id"], "title": q["name"], "subs": []} for q in quantities]
    if sweep_figs:
        sections.append({"id": "sweeps", "title": "Parameter sweeps", "subs": []})
    sections += [{"id": "iterations", "title": "Iterations and cases",
                  "subs": [{"id": "case-table", "title": "Case table"}]},
                 {"id": "fields", "title": "Fields and meshes", "subs": []},
                 {"id": "tables", "title": "Tables", "subs": []},
                 {"id": "provenance", "title": "Provenance", "subs": []},
                 {"id": "cautions", "title": "Cautions", "subs": []}]
    return {
        "version": __version__, "title": data.settings.title, "description": data.settings.description,
        "sections": sections, "counts": {k: counts.get(k, 0) for k in ("done", "failed", "pending")},
        "total": max(total, 1), "built": built.strftime("%Y-%m-%d %H:%M"), "notices": notices,
        "verdicts": verdicts, "more_verdicts": max(0, len(summary) - MAX_VERDICT_CARDS), "tally": tally,
        "waiting": waiting[:MAX_VERDICT_CARDS], "more_waiting": max(0, len(waiting) - MAX_VERDICT_CARDS),
        "quantities": quantities, "sweeps": [fig_ctx(f) for f in sweep_figs], "sweeps_num": sweeps_num,
        "histories": [fig_ctx(f) for f in hist_figs], "iter_num": iter_num,
        "case_table_html": page.table_html(ctable), "fields_case": fields_case,
        "field_notes": field_notes, "fields": [fig_ctx(f) for f in field_figs], "fields_num": fields_num,
        "tables": table_ctx, "tables_num": tables_num, "provenance": provenance(data, ctable, built),
        "prov_num": prov_num, "failures": failures(ctable), "caution_num": caution_num,
        "study_path": str(data.root),
    }


def _remove_stale(folder: Path, keep: set[Path]) -> None:
    """Drop figures and tables of an earlier build that this build no longer makes (renamed quantity)."""
    if not folder.is_dir():
        return
    for path in folder.iterdir():
        if path.is_file() and path.suffix in (".png", ".svg", ".csv", ".md", ".tex") and path not in keep:
            path.unlink()
