"""Profile figures: a profile quantity along its stations on every mesh level, the extrapolated
profile with its uncertainty band, and the study's reference curve when one is named."""

from __future__ import annotations

import numpy as np
import pandas as pd
from matplotlib.figure import Figure

from ...errors import InputError, Problem
from .. import style
from ..settings import Reference
from .common import done_rows, figure_legend, label, levels_count, new_figure


def load_reference(ref: Reference, study_file: str) -> pd.DataFrame:
    """The reference curve as a two-column frame (x, y), sorted by x."""
    try:
        table = pd.read_csv(ref.file, comment="#")  # reference files carry their source in # lines
    except Exception as exc:  # the csv parser raises several unrelated types
        raise InputError(Problem(str(ref.file), "", ref.file.name, f"cannot be read as CSV: {exc}")) from exc
    problems = [Problem(study_file, f"report.references.{ref.quantity}.{k}", col,
                        f"no such column in {ref.file.name} (columns: {', '.join(map(str, table.columns))})")
                for k, col in (("x", ref.x), ("y", ref.y)) if col not in table.columns]
    if problems:
        raise InputError(problems)
    out = pd.DataFrame({"x": pd.to_numeric(table[ref.x], errors="coerce"),
                        "y": pd.to_numeric(table[ref.y], errors="coerce")}).dropna()
    return out.sort_values("x").reset_index(drop=True)


def profile_panels(results: pd.DataFrame, uncertainty: pd.DataFrame | None, quantity: str,
                   unit: str | None, points: list[str], reference: pd.DataFrame | None = None,
                   reference_label: str = "reference", reference_point: str | None = None) -> Figure:
    done = done_rows(results, quantity)
    nlev = levels_count(results)
    fig, axes = new_figure(len(points), ncols=min(2, len(points)), panel_size=(4.4, 3.0))
    for ax, point in zip(axes, points):
        rows = done[done["point"].astype(str) == str(point)]
        ax.set_title(str(point), loc="left")
        ax.set_xlabel("station coordinate")
        ax.set_ylabel(label(quantity, unit))
        for lev, g in rows.groupby(rows["level"].astype(int)):
            g = g.sort_values("coord")
            ax.plot(g["coord"].to_numpy(float), g["value"].to_numpy(float), "-",
                    color=style.level_colour(int(lev), nlev), lw=1.1, label=f"level {lev}")
        if uncertainty is not None and not uncertainty.empty:
            u = uncertainty[(uncertainty["quantity"] == quantity) & (uncertainty["point"].astype(str) == str(point))]
            u = u[pd.to_numeric(u["coord"], errors="coerce").notna()].sort_values("coord")
            if len(u):
                c = u["coord"].to_numpy(float)
                fine = u["value_fine"].to_numpy(float)
                big_u = u["U"].to_numpy(float)
                ok = np.isfinite(fine) & np.isfinite(big_u)
                if ok.any():
                    ax.fill_between(c[ok], (fine - big_u)[ok], (fine + big_u)[ok], color=style.BAND, alpha=0.6,
                                    lw=0, label="finest ± U")
                ext = u["extrapolated"].to_numpy(float)
                if np.isfinite(ext).any():
                    ax.plot(c, ext, "--", color=style.ACCENT, lw=1.2, label="extrapolated")
        values = rows["value"].to_numpy(float)
        values = values[np.isfinite(values)]
        if len(values) and values.min() > 0 and values.max() / values.min() > 30:
            ax.set_yscale("log")  # a leading-edge spike would flatten the rest of the profile
        if reference is not None and len(reference) and reference_point in (None, str(point)):
            ax.plot(reference["x"], reference["y"], "s", color=style.GOOD, ms=3.5, mfc="none",
                    label=reference_label)
    figure_legend(fig, axes)
    return fig
