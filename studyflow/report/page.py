"""Assembling the self-contained HTML page from the built figures and tables."""

from __future__ import annotations

import base64
import html
import math
from importlib import resources
from pathlib import Path
from struct import unpack
from typing import Any

import jinja2
import pandas as pd

from .figures.common import fmt

TEXT_COLUMNS = {"reason", "verdict", "method"}
EMBED_LIMIT = 24 * 1024 * 1024  # above this many bytes of PNG, link the files instead of embedding them


def _template(name: str) -> str:
    return resources.files("studyflow.report").joinpath("templates", name).read_text(encoding="utf-8")


def environment() -> jinja2.Environment:
    loader = jinja2.DictLoader({"report": _template("report.html.j2"), "figure": _template("figure.html.j2")})
    return jinja2.Environment(loader=loader, autoescape=True, undefined=jinja2.StrictUndefined)


def cell(value: Any) -> str:
    if value is None or value is pd.NA:
        return "-"
    if isinstance(value, float):
        return fmt(value)
    if isinstance(value, (int,)) and not isinstance(value, bool):
        return str(value)
    text = str(value)
    return "-" if text in ("nan", "<NA>", "None") else text


def table_html(frame: pd.DataFrame, max_rows: int = 2000) -> str:
    """A plain, escaped HTML table; rows carry their case status as a class for colouring."""
    cols = list(frame.columns)
    head = "".join(f"<th>{html.escape(str(c))}</th>" for c in cols)
    body = []
    shown = frame.head(max_rows)
    for rec in shown.itertuples(index=False):
        values = list(rec)
        status = str(values[cols.index("status")]) if "status" in cols else ""
        cls = f' class="{html.escape(status)}"' if status in ("failed", "pending") else ""
        tds = "".join(
            f"<td class=\"text\">{html.escape(cell(v))}</td>" if c in TEXT_COLUMNS
            else f"<td>{html.escape(cell(v))}</td>" for c, v in zip(cols, values))
        body.append(f"<tr{cls}>{tds}</tr>")
    more = ""
    if len(frame) > max_rows:
        more = f'<p class="counts">{len(frame) - max_rows} more rows in the downloadable files.</p>'
    return f'<div class="tablewrap"><table><thead><tr>{head}</tr></thead><tbody>{"".join(body)}</tbody></table></div>{more}'


def png_size(path: Path) -> tuple[int, int]:
    data = path.read_bytes()[:24]
    return unpack(">II", data[16:24]) if len(data) >= 24 else (0, 0)


def image_sources(pngs: list[Path], report_dir: Path) -> dict[Path, str]:
    """data: URIs when the pictures together are small enough, else paths relative to the page."""
    total = sum(p.stat().st_size for p in pngs if p.is_file())
    if total <= EMBED_LIMIT:
        return {p: "data:image/png;base64," + base64.b64encode(p.read_bytes()).decode("ascii") for p in pngs}
    return {p: p.relative_to(report_dir).as_posix() for p in pngs}


def render(context: dict[str, Any]) -> str:
    context = dict(context)
    context["css"] = _template("report.css")
    return environment().get_template("report").render(**context)


def finite(x: Any) -> bool:
    try:
        return math.isfinite(float(x))
    except (TypeError, ValueError):
        return False
