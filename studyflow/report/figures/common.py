"""Small helpers shared by the figure builders."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
from matplotlib.figure import Figure

from .. import style


def new_figure(panels: int, ncols: int = 3, panel_size: tuple[float, float] = (3.4, 2.6)) -> tuple[Figure, list]:
    """A figure with ``panels`` axes on a grid; unused grid cells are removed."""
    style.apply()
    panels = max(1, panels)
    ncols = max(1, min(ncols, panels))
    if panels == 1:
        panel_size = (max(panel_size[0], 5.0), max(panel_size[1], 3.4))  # room for the legend below
    nrows = math.ceil(panels / ncols)
    # Figure() rather than pyplot.figure(): no global registry, nothing to leak across many figures.
    fig = Figure(figsize=(panel_size[0] * ncols, panel_size[1] * nrows + 0.3), layout="constrained")
    axes = fig.subplots(nrows, ncols, squeeze=False).ravel().tolist()
    for ax in axes[panels:]:
        ax.remove()
    return fig, axes[:panels]


def label(quantity: str, unit: str | None) -> str:
    return f"{quantity} [{unit}]" if unit and unit != "-" else quantity


def fmt(value: object, digits: int = 4) -> str:
    """Numbers as the report prints them everywhere: ``digits`` significant figures, '-' when absent."""
    try:
        x = float(value)  # type: ignore[arg-type]
    except (TypeError, ValueError):
        return "-" if value is None or (isinstance(value, float) and math.isnan(value)) else str(value)
    if math.isnan(x):
        return "-"
    if math.isinf(x):
        return "inf" if x > 0 else "-inf"
    return f"{x:.{digits}g}"


def done_rows(results: pd.DataFrame, quantity: str) -> pd.DataFrame:
    """The rows of ``quantity`` from finished cases: the only ones a figure draws."""
    return results[(results["quantity"] == quantity) & (results["status"] == "done")]


def size_axis(rows: pd.DataFrame) -> tuple[str, np.ndarray]:
    """The mesh-size coordinate to plot: ``h`` when known, else the cell count."""
    h = pd.to_numeric(rows.get("h"), errors="coerce") if "h" in rows else None
    if h is not None and h.notna().all() and (h > 0).all():
        return "h", h.to_numpy(float)
    cells = pd.to_numeric(rows.get("cells"), errors="coerce") if "cells" in rows else None
    if cells is not None and cells.notna().all():
        return "cells", cells.to_numpy(float)
    return "level", pd.to_numeric(rows["level"], errors="coerce").to_numpy(float)


def levels_count(results: pd.DataFrame | None) -> int:
    if results is None or results.empty or "level" not in results:
        return 1
    return int(pd.to_numeric(results["level"], errors="coerce").max()) + 1


def figure_legend(fig: Figure, axes: list, ncols: int = 6) -> None:
    """One legend for the whole figure, below the panels, with each label once.

    Cheaper than a legend per panel placed by 'best' (which tests every position against every
    data point) and it keeps the panels themselves free of clutter.
    """
    seen: dict[str, object] = {}
    for ax in axes:
        for handle, text in zip(*ax.get_legend_handles_labels()):
            if text and not text.startswith("_") and text not in seen:
                seen[text] = handle
    if seen:
        width = fig.get_figwidth()
        fits = max(2, int(width / 1.6))  # about 1.6 inch per legend entry at this font size
        fig.legend(list(seen.values()), list(seen.keys()), loc="outside lower center",
                   ncols=min(ncols, len(seen), fits), fontsize=7.5)
