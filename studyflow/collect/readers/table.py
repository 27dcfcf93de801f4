"""Collector ``csv``: a column of a delimited text table.

One value: a row by index (negative counts from the end, ``-1`` is the last and the default) or the
row whose ``where`` column holds a given value. The whole column: a profile against
``coord_column``, or with ``series: true`` a history (iteration numbers from ``iteration_column``,
else the row's count from 1). In a history an empty cell means the quantity was not recorded at
that iteration (a solver that monitors every few iterations, or an iterate with no value yet) and
the row is left out; any other text that is not a number is an error. The first non-comment line
is the header unless ``header: false``, when columns are addressed by position. The delimiter is
guessed from the header line (comma, semicolon, tab, else runs of whitespace) unless given.
"""

from __future__ import annotations

import csv
import io
from pathlib import Path
from typing import Any, Literal

from pydantic import field_validator, model_validator

from ..values import ReadFailure, Reading
from .base import ReaderOptions, to_number


class CsvOptions(ReaderOptions):
    column: str | int
    row: int | None = None
    where: dict[str, int | float | str] | None = None
    coord_column: str | int | None = None
    iteration_column: str | int | None = None
    header: bool = True
    delimiter: str | Literal["whitespace"] | None = None
    comment: str | None = "#"

    @field_validator("where")
    @classmethod
    def _one_column(cls, value: dict[str, Any] | None) -> dict[str, Any] | None:
        if value is not None and len(value) != 1:
            raise ValueError("where takes exactly one column and its value, e.g. {x: 0.5}")
        return value

    @model_validator(mode="after")
    def _one_selection(self) -> "CsvOptions":
        chosen = [n for n, v in (("row", self.row), ("where", self.where), ("coord_column", self.coord_column))
                  if v is not None] + (["series"] if self.series else [])
        if len(chosen) > 1:
            raise ValueError(f"choose one of row, where, coord_column or series: true (got {', '.join(chosen)})")
        if self.iteration_column is not None and not self.series:
            raise ValueError("iteration_column needs series: true")
        return self


def _delimiter(line: str, given: str | None) -> str | None:
    if given == "whitespace":
        return None
    if given is not None:
        return given
    for d in (",", ";", "\t"):
        if d in line:
            return d
    return None


def _rows(text: str, options: CsvOptions) -> tuple[list[str] | None, list[tuple[int, list[str]]]]:
    lines = [(n, ln) for n, ln in enumerate(text.splitlines(), start=1)
             if ln.strip() and not (options.comment and ln.lstrip().startswith(options.comment))]
    if not lines:
        raise ReadFailure("the table is empty")
    delim = _delimiter(lines[0][1], options.delimiter)
    if delim is None:
        rows = [(n, ln.split()) for n, ln in lines]
    else:
        parsed = csv.reader(io.StringIO("\n".join(ln for _, ln in lines)), delimiter=delim, skipinitialspace=True)
        rows = [(n, [c.strip() for c in fields]) for (n, _), fields in zip(lines, parsed)]
    if options.header:
        return rows[0][1], rows[1:]
    return None, rows


def _index(header: list[str] | None, column: str | int, width: int) -> int:
    if header is None:
        if not isinstance(column, int):
            raise ReadFailure("header: false, so columns are addressed by position", "column", column)
        idx = column
    elif isinstance(column, int) and str(column) not in header:
        idx = column
    else:
        if str(column) not in header:
            raise ReadFailure(f"no column {str(column)!r} (columns: {', '.join(header)})", "column", column)
        idx = header.index(str(column))
    if not -width <= idx < width:
        raise ReadFailure(f"column position {idx} out of range, the table has {width} columns", "column", column)
    return idx


def _cell(line: int, fields: list[str], idx: int, name: str | int) -> float:
    if idx >= len(fields) or idx < -len(fields):
        raise ReadFailure(f"line {line} has {len(fields)} fields, no column {name!r}", f"line {line}", fields)
    return to_number(fields[idx], f"column {name!r}, line {line}")


def read_csv(path: Path, options: CsvOptions, root: Path | None = None) -> Reading:
    """One value, a profile or a history from a column of a delimited text table."""
    try:
        text = path.read_text(encoding="utf-8")
    except UnicodeDecodeError as exc:
        raise ReadFailure(f"not a text table: {exc.reason}") from None
    header, rows = _rows(text, options)
    width = len(header) if header is not None else max(len(f) for _, f in rows)
    if not rows:
        raise ReadFailure("the table has a header but no rows", "column", options.column)
    col = _index(header, options.column, width)
    where = f"column {options.column!r}"

    if options.series or options.coord_column is not None:
        counted = list(enumerate(rows, start=1))
        if options.series:
            counted = [(k, (n, f)) for k, (n, f) in counted if not (col < len(f) and f[col].strip() == "")]
            if not counted:
                raise ReadFailure("the history has no recorded values", where, "")
        values = [_cell(n, f, col, options.column) for _, (n, f) in counted]
        other_name = options.iteration_column if options.series else options.coord_column
        other = None
        if other_name is not None:
            oc = _index(header, other_name, width)
            other = [_cell(n, f, oc, other_name) for _, (n, f) in counted]
        elif options.series:
            other = [float(k) for k, _ in counted]
        if options.series:
            return Reading.history(values, other, where)
        return Reading.profile(other, values, where)

    if options.where is not None:
        (sel_name, sel_value), = options.where.items()
        sc = _index(header, sel_name, width)
        target = sel_value if isinstance(sel_value, str) else float(sel_value)
        matches = []
        for n, f in rows:
            cell = f[sc] if sc < len(f) else None
            if cell is None:
                continue
            if isinstance(target, str):
                hit = cell == target
            else:
                try:
                    hit = to_number(cell, "") == target
                except ReadFailure:
                    hit = False
            if hit:
                matches.append((n, f))
        key = f"where {sel_name} = {sel_value!r}"
        if not matches:
            raise ReadFailure("no row matches", key)
        if len(matches) > 1:
            raise ReadFailure(f"{len(matches)} rows match (lines {', '.join(str(n) for n, _ in matches[:5])})", key)
        n, f = matches[0]
        return Reading.scalar(_cell(n, f, col, options.column), f"{where}, line {n}")

    row = -1 if options.row is None else options.row
    if not -len(rows) <= row < len(rows):
        raise ReadFailure(f"row {row} out of range, the table has {len(rows)} rows", "row", row)
    n, f = rows[row]
    return Reading.scalar(_cell(n, f, col, options.column), f"{where}, line {n}")
