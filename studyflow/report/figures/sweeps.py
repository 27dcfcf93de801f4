"""Sweep figures: one scalar quantity against one swept parameter, one curve per mesh level, the
extrapolated curve, and the numerical-uncertainty error bars of the analysis on the finest level."""

from __future__ import annotations

import numpy as np
import pandas as pd
from matplotlib.figure import Figure

from .. import style
from .common import figure_legend, fmt, label, levels_count, new_figure

MAX_PANELS = 6


def swept(results: pd.DataFrame, parameters: list[str]) -> list[str]:
    """Parameters that take more than one numeric value across the study's points."""
    out = []
    for p in parameters:
        vals = pd.to_numeric(results[p], errors="coerce")
        if vals.notna().any() and vals.dropna().nunique() > 1:
            out.append(p)
    return out


def _groups(points: pd.DataFrame, param: str, others: list[str]) -> list[tuple[str, pd.DataFrame]] | None:
    """Points split by the values of the other swept parameters, so each curve varies ``param`` alone.

    None when that gives no usable curve (a space-filling design varies everything at once): then the
    figure shows every point as a scatter instead of lines.
    """
    if not others:
        return [("", points)]
    groups = [(", ".join(f"{o} = {fmt(v, 3)}" for o, v in zip(others, key if isinstance(key, tuple) else (key,))), g)
              for key, g in points.groupby(others, sort=True, dropna=False)]
    groups = [(t, g) for t, g in groups if g[param].nunique() > 1]
    if not groups or len(groups) > MAX_PANELS:
        return None
    return groups


def quantity_vs_parameter(results: pd.DataFrame, uncertainty: pd.DataFrame | None, quantity: str,
                          unit: str | None, param: str, others: list[str],
                          reference: pd.DataFrame | None = None, reference_label: str = "") -> Figure:
    done = results[(results["quantity"] == quantity) & (results["status"] == "done")
                   & (results["kind"] == "scalar")].copy()
    done[param] = pd.to_numeric(done[param], errors="coerce")
    nlev = levels_count(results)
    fine_level = nlev - 1
    pts = done.drop_duplicates("point")[["point", param] + others]
    groups = _groups(pts, param, others)
    scatter = groups is None
    if scatter:
        groups = [("all points", pts)]
    fig, axes = new_figure(len(groups), ncols=min(3, len(groups)))
    unc = None
    if uncertainty is not None and not uncertainty.empty:
        unc = uncertainty[(uncertainty["quantity"] == quantity)]
        if "coord" in unc:
            unc = unc[pd.to_numeric(unc["coord"], errors="coerce").isna()]
        # one row per point (scalars only); a repeated point keeps its first row
        unc = unc.assign(point=unc["point"].astype(str)).drop_duplicates("point").set_index("point", drop=False)
    style_line = "o" if scatter else "o-"
    for ax, (title, group) in zip(axes, groups):
        ids = set(group["point"].astype(str))
        sel = done[done["point"].astype(str).isin(ids)]
        ax.set_title(title or f"{quantity} against {param}", loc="left")
        ax.set_xlabel(param)
        ax.set_ylabel(label(quantity, unit))
        for lev in sorted(sel["level"].astype(int).unique()):
            rows = sel[sel["level"].astype(int) == lev].sort_values(param)
            x = rows[param].to_numpy(float)
            y = rows["value"].to_numpy(float)
            colour = style.level_colour(lev, nlev)
            if lev == fine_level and unc is not None:
                err = np.array([float(unc["U"].get(str(p), np.nan)) if str(p) in unc.index else np.nan
                                for p in rows["point"]])
                ax.errorbar(x, y, yerr=np.where(np.isfinite(err), err, 0.0), fmt=style_line, color=colour,
                            capsize=3, lw=1.2, label=f"level {lev} (finest) ± U")
            else:
                ax.plot(x, y, style_line, color=colour, lw=1.0, label=f"level {lev}")
        if unc is not None:
            order = group.sort_values(param)
            ext = [float(unc["extrapolated"].get(str(p), np.nan)) if str(p) in unc.index else np.nan
                   for p in order["point"]]
            ext = np.array(ext)
            if np.isfinite(ext).any():
                ax.plot(order[param].to_numpy(float), ext, "*" if scatter else "*--", color=style.ACCENT,
                        ms=8, lw=1.2, label="extrapolated")
        if reference is not None:
            ax.plot(reference.iloc[:, 0], reference.iloc[:, 1], "-", color=style.GOOD, lw=1.4,
                    label=reference_label or "reference")
        xs = pd.to_numeric(sel[param], errors="coerce").dropna()
        if len(xs) and xs.min() > 0 and xs.max() / xs.min() >= 10:
            ax.set_xscale("log")  # parameters spanning decades (Reynolds numbers) read better on log axes
    figure_legend(fig, axes)
    return fig
