"""What a collector returns: a scalar, a profile along a coordinate, or a series over iterations."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Literal

import numpy as np

Kind = Literal["scalar", "profile", "history"]


@dataclass(frozen=True)
class Reading:
    """One quantity of one case as read from its output.

    ``kind`` is ``scalar`` (``values`` has one element), ``profile`` (``coord`` holds the station
    coordinates) or ``history`` (``coord`` holds the iteration numbers, 1, 2, ... when the file gives none).
    """

    kind: Kind
    values: np.ndarray
    coord: np.ndarray | None = None
    where: str = ""  # where in the file the value came from (key path, column, pattern), for reasons

    @staticmethod
    def scalar(value: float, where: str = "") -> "Reading":
        return Reading("scalar", np.asarray([value], dtype=float), None, where)

    @staticmethod
    def profile(coord: Any, values: Any, where: str = "") -> "Reading":
        values = np.asarray(values, dtype=float).ravel()
        return Reading("profile", values, np.asarray(coord, dtype=float).ravel(), where)

    @staticmethod
    def history(values: Any, iteration: Any | None = None, where: str = "") -> "Reading":
        values = np.asarray(values, dtype=float).ravel()
        # Without iteration numbers the entries count 1, 2, ..., so the last number is the iteration count.
        it = np.arange(1, values.size + 1, dtype=float) if iteration is None else np.asarray(iteration, dtype=float)
        return Reading("history", values, it.ravel(), where)

    @property
    def final(self) -> float:
        """The last value: the scalar itself, the last station, or the last iteration."""
        return float(self.values[-1]) if self.values.size else float("nan")


NO_VALUE: Any = object()  # marks a failure with no offending value to show (e.g. a missing file)


def _show(value: Any) -> str:
    text = repr(value)
    return text if len(text) <= 80 else text[:77] + "..."


class ReadFailure(Exception):
    """A case output cannot be read as declared. Not a StudyflowError: it marks one quantity of one
    case failed (with this reason), it never stops a collection."""

    def __init__(self, message: str, key: str = "", value: Any = NO_VALUE, *, file: str = ""):
        self.message = message
        self.key = key
        self.value = value
        self.file = file
        super().__init__(message)

    def reason(self, file: str | None = None) -> str:
        """``file: key: message (got value)``, the form every collection reason takes."""
        parts = [p for p in (file if file is not None else self.file, self.key) if p]
        text = ": ".join(parts + [self.message])
        return text if self.value is NO_VALUE else f"{text} (got {_show(self.value)})"


@dataclass(frozen=True)
class QuantityResult:
    """The outcome of reading one quantity: ``ok`` with a reading, or ``failed`` with a reason."""

    name: str
    status: Literal["ok", "failed"]
    unit: str = "-"
    reading: Reading | None = None
    reason: str = ""
    files: tuple[str, ...] = field(default_factory=tuple)
