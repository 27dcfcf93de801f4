"""Mesh-convergence figures of one scalar quantity: value against mesh size with the extrapolated
value and its uncertainty band, and the discretisation error against mesh size on log-log axes."""

from __future__ import annotations

import numpy as np
import pandas as pd
from matplotlib.figure import Figure

from .. import style
from ..settings import Reference
from .common import done_rows, figure_legend, fmt, label, levels_count, new_figure, size_axis


def _unc_row(unc: pd.DataFrame | None, point: str) -> pd.Series | None:
    if unc is None or unc.empty:
        return None
    rows = unc[unc["point"].astype(str) == str(point)]
    return rows.iloc[0] if len(rows) else None


def value_vs_size(results: pd.DataFrame, uncertainty: pd.DataFrame | None, quantity: str,
                  unit: str | None, points: list[str], reference: Reference | None = None) -> Figure:
    """One panel per point: the value on each mesh level against mesh size, the extrapolated value at
    h = 0, the band value_fine +- U from the analysis table, and a reference value when one is named."""
    done = done_rows(results, quantity)
    nlev = levels_count(results)
    fig, axes = new_figure(len(points), ncols=min(3, len(points)))
    for ax, point in zip(axes, points):
        rows = done[done["point"].astype(str) == str(point)].sort_values("level")
        ax.set_title(str(point), loc="left")
        ax.set_ylabel(label(quantity, unit))
        if rows.empty:
            ax.set_xlabel("h")
            ax.text(0.5, 0.5, "no finished case yet", transform=ax.transAxes, ha="center", color=style.PENDING)
            continue
        xname, x = size_axis(rows)
        y = rows["value"].to_numpy(float)
        ax.set_xlabel({"h": "mesh size h", "cells": "cells"}.get(xname, "mesh level"))
        ax.plot(x, y, color=style.INK, lw=1.0, zorder=2)
        for xi, yi, lev in zip(x, y, rows["level"].astype(int)):
            ax.plot([xi], [yi], "o", color=style.level_colour(lev, nlev), zorder=3,
                    markeredgecolor=style.INK, markeredgewidth=0.5, label=f"level {lev}")
        if reference is not None and reference.value is not None and reference.point in (None, str(point)):
            ax.axhline(reference.value, color=style.GOOD, ls="-.", lw=1.2, zorder=1, label=reference.label)
        u = _unc_row(uncertainty, point)
        if u is not None:
            ext = float(u.get("extrapolated", np.nan))
            fine = float(u.get("value_fine", np.nan))
            big_u = float(u.get("U", np.nan))
            right = float(np.nanmax(x)) * 1.05
            left = 0.0 if xname == "h" else float(np.nanmin(x)) * 0.9
            if np.isfinite(fine) and np.isfinite(big_u):
                ax.fill_between([left, right], fine - big_u, fine + big_u, color=style.BAND, alpha=0.55,
                                lw=0, zorder=1, label="finest-mesh value ± U")
            if np.isfinite(ext):
                ax.axhline(ext, color=style.ACCENT, ls="--", lw=1.0, zorder=1)
                if xname == "h":
                    ax.plot([0.0], [ext], marker="*", ms=10, color=style.ACCENT, zorder=4,
                            label="extrapolated (h = 0)")
            ax.set_title(f"p = {fmt(u.get('order'), 3)}   ext = {fmt(ext)}   U = {fmt(big_u, 3)}", loc="right",
                         fontsize=7, fontweight="normal", color=style.INK)
            if xname == "h":
                ax.set_xlim(left=0.0)
            if xname == "cells":
                ax.set_xscale("log")
        elif xname == "cells":
            ax.set_xscale("log")
    figure_legend(fig, axes)
    return fig


def error_vs_size(results: pd.DataFrame, uncertainty: pd.DataFrame | None, quantity: str,
                  formal_order: float | None, points: list[str]) -> Figure:
    """|phi_i - phi_ext| against h for every point on log-log axes, with a line of the formal order.

    A point whose extrapolated value is missing (no extrapolation possible) is left out; its verdict
    in the table says why.
    """
    fig, (ax,) = new_figure(1, ncols=1, panel_size=(5.4, 3.8))
    done = done_rows(results, quantity)
    ax.set_title(f"{quantity}: discretisation error", loc="left")
    ax.set_xlabel("mesh size h")
    ax.set_ylabel(f"|{quantity} - {quantity}_ext|")
    anchor: tuple[float, float] | None = None
    drawn = 0
    for point in points:
        u = _unc_row(uncertainty, point)
        if u is None or not np.isfinite(float(u.get("extrapolated", np.nan))):
            continue
        rows = done[done["point"].astype(str) == str(point)].sort_values("level")
        xname, x = size_axis(rows)
        if xname != "h" or rows.empty:
            continue
        err = np.abs(rows["value"].to_numpy(float) - float(u["extrapolated"]))
        keep = err > 0
        if not keep.any():
            continue
        named = drawn < 8
        colour = style.SERIES[drawn % len(style.SERIES)] if named else style.PENDING
        ax.plot(x[keep], err[keep], "o-", color=colour, lw=1.2 if named else 0.6, ms=4 if named else 2,
                label=f"{point} (p = {fmt(u.get('order'), 3)})" if named else None, alpha=1 if named else 0.5)
        if anchor is None:
            j = int(np.argmin(x[keep]))
            anchor = (float(x[keep][j]), float(err[keep][j]))
        drawn += 1
    if drawn:
        ax.set_xscale("log")
        ax.set_yscale("log")
    if anchor is not None and formal_order:
        xs = np.array([anchor[0], anchor[0] * 4.0])
        ax.plot(xs, anchor[1] * (xs / anchor[0]) ** formal_order, color=style.ACCENT, ls=":", lw=1.6,
                label=f"slope {fmt(formal_order, 3)} (formal order)")
    if drawn:
        ax.legend(loc="upper left")
    else:
        ax.text(0.5, 0.5, "no extrapolated value to compare with", transform=ax.transAxes, ha="center",
                color=style.PENDING)
    return fig
