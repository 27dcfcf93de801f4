"""Writing figures (PNG and SVG) and tables (CSV, Markdown, LaTeX) into the report folder.

Each file is written atomically, so a browser or a script reading the report while it is rebuilt
sees the previous file or the new one, never half of one.
"""

from __future__ import annotations

import base64
import io
import re
from dataclasses import dataclass, field
from pathlib import Path

import pandas as pd
from matplotlib.figure import Figure

from ..fsutil import atomic_write_bytes, atomic_write_text

PNG_DPI = 110


def slug(text: str) -> str:
    """A file-name-safe form of a quantity, parameter or point name."""
    return re.sub(r"[^A-Za-z0-9_.-]+", "-", str(text)).strip("-.") or "x"


@dataclass
class FigureFile:
    name: str
    title: str
    caption: str
    png: Path
    svg: Path
    note: str = ""  # e.g. why a field picture fell back to matplotlib


@dataclass
class TableFile:
    name: str
    title: str
    frame: pd.DataFrame
    files: dict[str, Path] = field(default_factory=dict)


def save_figure(fig: Figure, folder: Path, name: str, title: str, caption: str = "", note: str = "") -> FigureFile:
    png, svg = folder / f"{name}.png", folder / f"{name}.svg"
    for path, kwargs in ((png, {"format": "png", "dpi": PNG_DPI}), (svg, {"format": "svg"})):
        buf = io.BytesIO()
        fig.savefig(buf, metadata={"Date": None} if kwargs["format"] == "svg" else None, **kwargs)
        atomic_write_bytes(path, buf.getvalue())
        # The layout solved for the PNG holds for the SVG too: solving it again costs most of the time.
        fig.set_layout_engine("none")
    return FigureFile(name, title, caption, png, svg, note)


def svg_wrapping_png(png: Path, svg: Path) -> None:
    """An SVG that holds a raster picture (the off-screen renderer draws pixels, not vectors)."""
    from struct import unpack

    data = png.read_bytes()
    width, height = unpack(">II", data[16:24])  # PNG IHDR: width and height follow the signature
    b64 = base64.b64encode(data).decode("ascii")
    atomic_write_text(svg, (
        f'<svg xmlns="http://www.w3.org/2000/svg" width="{width}" height="{height}" '
        f'viewBox="0 0 {width} {height}"><image width="{width}" height="{height}" '
        f'href="data:image/png;base64,{b64}"/></svg>\n'))


# Above this many rows a table is written as CSV only: nobody pastes 10^4 rows into a paper, and the
# Markdown and LaTeX writers would take most of a large study's report time.
TYPESET_ROWS = 5000


def _md_escape(v: object) -> object:
    """HTML special characters and table pipes escaped in text: a study file from a stranger must
    not put markup into a table a reviewer pastes into a Markdown page."""
    if not isinstance(v, str):
        return v
    return v.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;").replace("|", "\\|")


def _markdown_safe(frame: pd.DataFrame) -> pd.DataFrame:
    safe = frame.copy()
    for c in safe.columns:
        if safe[c].dtype == object or pd.api.types.is_string_dtype(safe[c]):
            safe[c] = safe[c].map(_md_escape)
    safe.columns = [_md_escape(str(c)) for c in safe.columns]
    return safe


def save_table(frame: pd.DataFrame, folder: Path, name: str, title: str) -> TableFile:
    out = TableFile(name, title, frame)
    stem = folder / name
    atomic_write_text(stem.with_suffix(".csv"), frame.to_csv(index=False))
    out.files = {"CSV": stem.with_suffix(".csv")}
    if len(frame) > TYPESET_ROWS:
        return out
    md = _markdown_safe(frame).to_markdown(index=False) if len(frame.columns) else ""
    atomic_write_text(stem.with_suffix(".md"), f"# {_md_escape(title)}\n\n{md}\n")
    latex = frame.to_latex(index=False, escape=True, na_rep="-", float_format=lambda x: f"{x:.6g}",
                           caption=title, label=f"tab:{name}", longtable=len(frame) > 40)
    atomic_write_text(stem.with_suffix(".tex"), latex)
    out.files.update({"Markdown": stem.with_suffix(".md"), "LaTeX": stem.with_suffix(".tex")})
    return out
