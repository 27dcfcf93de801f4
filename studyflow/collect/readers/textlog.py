"""Collector ``log``: a regular expression over a text log.

``match: last`` (the default) or ``first`` gives one value; ``match: all`` (or ``series: true``)
gives every match as a history, e.g. a residual per iteration. The value is the pattern's only
capture group, its group named ``value``, or the group chosen by ``group`` (number or name); the
iteration numbers come from ``iteration_group`` when given, else from the match count.
"""

from __future__ import annotations

import re
from pathlib import Path
from typing import Literal

from pydantic import field_validator, model_validator

from ..values import ReadFailure, Reading
from .base import ReaderOptions, to_number

_FLAGS = {"ignorecase": re.IGNORECASE, "multiline": re.MULTILINE, "dotall": re.DOTALL}


class LogOptions(ReaderOptions):
    pattern: str
    match: Literal["last", "first", "all"] = "last"
    group: int | str | None = None
    iteration_group: int | str | None = None
    flags: list[Literal["ignorecase", "multiline", "dotall"]] = []

    @field_validator("pattern")
    @classmethod
    def _compiles(cls, value: str) -> str:
        try:
            compiled = re.compile(value)
        except re.error as exc:
            raise ValueError(f"not a regular expression: {exc}") from None
        if compiled.groups == 0:
            raise ValueError("the pattern needs a capture group around the number, e.g. 'CL = (\\S+)'")
        return value

    @model_validator(mode="after")
    def _groups_exist(self) -> "LogOptions":
        compiled = self.compiled()
        for name, grp in (("group", self.group), ("iteration_group", self.iteration_group)):
            if isinstance(grp, int) and not 0 < grp <= compiled.groups:
                raise ValueError(f"{name} {grp} does not exist: the pattern has {compiled.groups} group(s)")
            if isinstance(grp, str) and grp not in compiled.groupindex:
                raise ValueError(f"{name} {grp!r} is not a named group of the pattern")
        if self.group is None and "value" not in compiled.groupindex:
            free = compiled.groups - (self.iteration_group is not None)
            if free != 1:
                raise ValueError("the pattern has several groups: name the value's group with group: or (?P<value>...)")
        return self

    def mode(self) -> str:
        return "all" if self.series else self.match  # a history is every match

    def compiled(self) -> re.Pattern[str]:
        flags = 0
        for f in self.flags:
            flags |= _FLAGS[f]
        return re.compile(self.pattern, flags)

    def value_group(self) -> int | str:
        if self.group is not None:
            return self.group
        compiled = self.compiled()
        if "value" in compiled.groupindex:
            return "value"
        it = self.iteration_group
        it_index = compiled.groupindex.get(it) if isinstance(it, str) else it
        return next(i for i in range(1, compiled.groups + 1) if i != it_index)


def read_log(path: Path, options: LogOptions, root: Path | None = None) -> Reading:
    """The last, first or every match of a regular expression in a text log."""
    text = path.read_text(encoding="utf-8", errors="replace")
    rx = options.compiled()
    grp = options.value_group()
    where = f"pattern {options.pattern!r}"
    mode = options.mode()
    if mode == "first":
        m = rx.search(text)
        matches = [m] if m else []
    else:
        matches = list(rx.finditer(text))
    if not matches:
        raise ReadFailure("no line matches", where)
    if mode != "all":
        m = matches[-1]
        line = text.count("\n", 0, m.start()) + 1
        return Reading.scalar(to_number(m.group(grp), f"{where}, line {line}"), f"{where}, line {line}")

    def number(m: re.Match[str], g: int | str) -> float:
        raw = m.group(g)
        try:
            return to_number(raw, where)
        except ReadFailure:
            line = text.count("\n", 0, m.start()) + 1
            raise ReadFailure("not a number", f"{where}, line {line}", raw) from None

    values = [number(m, grp) for m in matches]
    its = None if options.iteration_group is None else [number(m, options.iteration_group) for m in matches]
    return Reading.history(values, its, where)
