"""Residual histories of every case as small multiples, with the study's tolerance drawn on each.

A page holds up to ``PANELS_PER_FIGURE`` panels drawn inside one matplotlib axes: every panel shares
the page's iteration range and its range of decades, so one pair of scales (written along the left
column and the bottom row) serves all of them. Thousands of separate log-scaled axes would take
minutes to lay out; this way a page of 48 cases draws in well under a second.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
from matplotlib.collections import LineCollection
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import Rectangle

from .. import style
from .common import fmt

PANELS_PER_FIGURE = 48
COLUMNS = 8
MAX_SAMPLES = 300  # points per drawn line: a 10^5-iteration history would only slow the figure down
GAP = 0.18  # space between panels, in panel widths


def thin(iterations: np.ndarray, values: np.ndarray, limit: int = MAX_SAMPLES) -> tuple[np.ndarray, np.ndarray]:
    """At most ``limit`` samples, always keeping the first and the last (the residual drop is read there)."""
    n = len(iterations)
    if n <= limit:
        return iterations, values
    idx = np.unique(np.r_[np.linspace(0, n - 1, limit).astype(int), n - 1])
    return iterations[idx], values[idx]


def panel_origin(index: int, columns: int, rows: int) -> tuple[float, float]:
    """Lower-left corner of panel ``index`` (row-major from the top left) in page coordinates."""
    row, col = divmod(index, columns)
    return col * (1.0 + GAP), (rows - 1 - row) * (1.0 + GAP + 0.12)


def residual_pages(histories: pd.DataFrame, cases: list[str], residuals: list[str],
                   tolerance: float | None, status: dict[str, str] | None = None) -> list[Figure]:
    """Pages of small multiples, one panel per case (in the order of ``cases``).

    ``status`` (case -> done | failed | pending) colours the panel titles and names an empty panel.
    """
    status = status or {}
    title_colour = {"failed": style.BAD, "pending": style.PENDING}
    style.apply()
    hist = histories[histories["quantity"].isin(residuals)] if residuals else histories
    hist = hist.assign(case=hist["case"].astype(str))
    by_case = {c: g for c, g in hist.groupby("case", sort=False)}
    names = sorted(set(hist["quantity"].astype(str)))
    colours = {q: style.SERIES[i % len(style.SERIES)] for i, q in enumerate(names)}
    pages = []
    for start in range(0, len(cases), PANELS_PER_FIGURE):
        chunk = cases[start:start + PANELS_PER_FIGURE]
        lines: dict[str, list[tuple[str, np.ndarray, np.ndarray]]] = {}
        lo, hi, it_max = math.inf, -math.inf, 1.0
        for case in chunk:
            g = by_case.get(case)
            if g is None:
                continue
            for q, rows in g.groupby("quantity", sort=False):
                rows = rows.sort_values("iteration")
                it, val = thin(rows["iteration"].to_numpy(float), np.abs(rows["value"].to_numpy(float)))
                ok = np.isfinite(val) & (val > 0)  # a zero residual has no place on a log scale
                if not ok.any():
                    continue
                logv = np.log10(val[ok])
                lines.setdefault(case, []).append((str(q), it[ok], logv))
                lo, hi = min(lo, float(logv.min())), max(hi, float(logv.max()))
                it_max = max(it_max, float(it[ok].max()))
        if tolerance and tolerance > 0:
            lo, hi = min(lo, math.log10(tolerance)), max(hi, math.log10(tolerance))
        if not math.isfinite(lo):
            lo, hi = -1.0, 0.0
        lo, hi = math.floor(lo), math.ceil(hi)
        hi = hi if hi > lo else lo + 1
        columns = min(COLUMNS, len(chunk))
        rows_n = math.ceil(len(chunk) / columns)
        # Margins in inches, so one row of panels gets the same room for its labels as ten rows.
        left, bottom, top, right = 0.6, 0.85, 0.15, 0.1
        width_in, height_in = 1.55 * columns + left + right, 1.3 * rows_n + bottom + top
        fig = Figure(figsize=(width_in, height_in))
        ax = fig.add_axes((left / width_in, bottom / height_in, 1 - (left + right) / width_in,
                           1 - (bottom + top) / height_in))
        ax.set_axis_off()
        segs: dict[str, list[np.ndarray]] = {q: [] for q in names}
        frames, tol_segs, grid_segs = [], [], []
        for i, case in enumerate(chunk):
            x0, y0 = panel_origin(i, columns, rows_n)
            frames.append(Rectangle((x0, y0), 1.0, 1.0))
            state = status.get(case, "")
            ax.text(x0, y0 + 1.03, case + (f" ({state})" if state in title_colour else ""), fontsize=5.5,
                    va="bottom", ha="left", color=title_colour.get(state, style.INK), clip_on=False)
            for d in range(lo + 1, hi):
                yy = y0 + (d - lo) / (hi - lo)
                grid_segs.append(np.array([[x0, yy], [x0 + 1.0, yy]]))
            for q, it, logv in lines.get(case, []):
                segs[q].append(np.c_[x0 + it / it_max, y0 + (logv - lo) / (hi - lo)])
            if case not in lines:
                ax.text(x0 + 0.5, y0 + 0.5, {"pending": "not run yet", "failed": "failed, no history"}.get(state, "no history"),
                        fontsize=6, ha="center", va="center", color=title_colour.get(state, style.PENDING))
            if tolerance and tolerance > 0:
                yt = y0 + (math.log10(tolerance) - lo) / (hi - lo)
                tol_segs.append(np.array([[x0, yt], [x0 + 1.0, yt]]))
            if i % columns == 0:
                for d, va in ((hi, "top"), (lo, "bottom")):
                    ax.text(x0 - 0.04, y0 + (d - lo) / (hi - lo), f"1e{d}", fontsize=5.5, ha="right", va=va)
            if i >= len(chunk) - columns:
                ax.text(x0, y0 - 0.04, "0", fontsize=5.5, ha="left", va="top")
                ax.text(x0 + 1.0, y0 - 0.04, fmt(it_max, 4), fontsize=5.5, ha="right", va="top")
        from matplotlib.collections import PatchCollection

        ax.add_collection(PatchCollection(frames, facecolor="#ffffff", edgecolor=style.RULE, linewidth=0.6))
        ax.add_collection(LineCollection(grid_segs, colors=style.RULE, linewidths=0.4))
        for q in names:
            if segs[q]:
                ax.add_collection(LineCollection(segs[q], colors=colours[q], linewidths=0.8, label=q))
        if tol_segs:
            ax.add_collection(LineCollection(tol_segs, colors=style.ACCENT, linewidths=0.8, linestyles="--",
                                             label=f"tolerance {fmt(tolerance, 3)}"))
        width = columns * (1.0 + GAP) - GAP
        height = rows_n * (1.0 + GAP + 0.12) - GAP - 0.12
        ax.set_xlim(-0.02, width + 0.02)
        ax.set_ylim(-0.02, height + 0.16)
        # Written as figure text; kept on the axes as labels too, so readers of the object find them.
        ax.set_xlabel("iteration")
        ax.set_ylabel("residual (log scale)")
        fig.text(0.5, 0.42 / height_in, f"iteration (each panel: 0 to {fmt(it_max, 4)})", ha="center",
                 va="bottom", fontsize=8)
        fig.text(0.1 / width_in, (bottom + 0.5 * (height_in - bottom - top)) / height_in,
                 "residual, log scale", rotation=90, va="center", fontsize=8)
        handles = [Line2D([], [], color=colours[q], label=q) for q in names]
        if tol_segs:
            handles.append(Line2D([], [], color=style.ACCENT, ls="--", label=f"tolerance {fmt(tolerance, 3)}"))
        if handles:
            fig.legend(handles=handles, loc="lower center", ncols=min(6, len(handles)), fontsize=7,
                       bbox_to_anchor=(0.5, 0.02 / height_in))
        fig.studyflow_panels = list(chunk)  # for readers of the object (tests): which case is which panel
        fig.studyflow_scale = {"decades": (lo, hi), "iterations": (0.0, it_max)}
        pages.append(fig)
    return pages
