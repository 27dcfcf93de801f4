"""The report's own visual identity: one palette and one set of plot defaults, shared by all figures.

Colours are chosen to stay distinguishable in grey-scale print and for the common forms of colour
blindness (ordered by lightness, not only by hue).
"""

from __future__ import annotations

import matplotlib

matplotlib.use("Agg")  # no display on build machines; set before pyplot is imported anywhere

from matplotlib import rcParams

INK = "#1d2a35"  # text and axes
PAPER = "#fbfaf6"  # page and figure background
RULE = "#d9d3c4"  # grid lines and borders
ACCENT = "#b5532f"  # extrapolated value, tolerance lines
BAND = "#e7b98f"  # uncertainty band fill
GOOD = "#3c7a5a"
WARN = "#c08a1e"
BAD = "#a33a3a"
PENDING = "#7a8693"

# One colour per mesh level, coarse (light) to fine (dark), so the refinement reads as a ramp.
LEVEL_RAMP = ["#a8cfdc", "#6fa9c0", "#3f84a3", "#25607f", "#163f5a", "#0a2236"]

SERIES = ["#2f7190", "#b5532f", "#3c7a5a", "#7b4f9d", "#c08a1e", "#4a5a68", "#a33a3a", "#5f9db2"]


def level_colour(level: int, levels: int) -> str:
    """Colour of mesh ``level`` out of ``levels``: the finest level always gets the darkest shade."""
    if levels <= 1:
        return LEVEL_RAMP[3]
    top = len(LEVEL_RAMP) - 1
    # Spread the levels over the whole ramp so neighbouring levels stay distinguishable.
    return LEVEL_RAMP[min(top, round(int(level) * top / (levels - 1)))]


def apply() -> None:
    """Set the matplotlib defaults every report figure uses."""
    rcParams.update(
        {
            "figure.facecolor": PAPER,
            "axes.facecolor": "#ffffff",
            "savefig.facecolor": PAPER,
            "axes.edgecolor": INK,
            "axes.labelcolor": INK,
            "axes.titlesize": 10,
            "axes.titleweight": "bold",
            "axes.labelsize": 9,
            "axes.grid": True,
            "grid.color": RULE,
            "grid.linewidth": 0.6,
            "axes.spines.top": False,
            "axes.spines.right": False,
            "xtick.color": INK,
            "ytick.color": INK,
            "xtick.labelsize": 8,
            "ytick.labelsize": 8,
            "legend.fontsize": 7.5,
            "legend.frameon": False,
            "font.family": "DejaVu Sans",
            "lines.linewidth": 1.6,
            "lines.markersize": 5,
            "svg.fonttype": "none",  # keep text as text in SVG so it can be edited and searched
            "svg.hashsalt": "studyflow",  # stable ids: rebuilding an unchanged study gives the same SVG
        }
    )
