"""Schema of the ``quantities:`` and ``iteration:`` blocks: what to collect from each case and how
its iterative convergence is judged.

Each quantity names a collector by ``from:``; the keys shared by every collector (``file``, ``unit``,
``series``) are checked here. The collector-specific options are checked against that collector's
own options model by ``studyflow.collect.check_quantities`` (the collection layer owns the readers,
and this layer may not import upward); ``studyflow.api`` runs that check when a study is loaded, so
a bad option still fails before anything is rendered or run.
"""

from __future__ import annotations

import re
from pathlib import PurePosixPath
from typing import Any

from pydantic import BaseModel, ConfigDict, Field, field_validator

# Quantity names become table values and record keys; keep them plain so CSV and Parquet agree.
QUANTITY_NAME = re.compile(r"^[A-Za-z_][A-Za-z0-9_.\-]*$")


class QuantitySpec(BaseModel):
    """One monitored quantity. ``from`` picks the collector; the other keys are its options."""

    model_config = ConfigDict(extra="allow", populate_by_name=True, frozen=True)

    source: str = Field(alias="from", min_length=1, description="collector name, e.g. json, csv, log, field")
    file: str = Field(min_length=1, description="file inside the case folder, relative to it")
    unit: str = "-"
    series: bool = Field(False, description="a history (one value per iteration), not a final value")
    description: str = ""

    @field_validator("file")
    @classmethod
    def _relative_inside(cls, value: str) -> str:
        # The collector confines the path again at read time (links can change); this catches typos early.
        path = PurePosixPath(value.replace("\\", "/"))
        if path.is_absolute() or value[1:3] == ":/" or value[1:3] == ":\\":
            raise ValueError("must be a path relative to the case folder, not an absolute path")
        depth = 0
        for part in path.parts:
            depth += -1 if part == ".." else (0 if part == "." else 1)
            if depth < 0:
                raise ValueError("must stay inside the case folder ('..' leaves it)")
        return value

    def options(self) -> dict[str, Any]:
        """The collector-specific options (everything but the common keys)."""
        return dict(self.model_extra or {})


class IterationSpec(BaseModel):
    """How the iterative convergence of a case is judged (the ``iteration:`` block).

    ``flag`` names a collected quantity whose truth value wins when it was read; otherwise every
    quantity in ``residuals`` must end at or below ``tolerance`` (one number, or one per residual).
    """

    model_config = ConfigDict(extra="forbid", frozen=True)

    residuals: list[str] = Field(default_factory=list)
    tolerance: float | dict[str, float] | None = None
    flag: str | None = None

    @field_validator("tolerance")
    @classmethod
    def _positive(cls, value: float | dict[str, float] | None) -> float | dict[str, float] | None:
        values = value.values() if isinstance(value, dict) else [] if value is None else [value]
        for v in values:
            if not v > 0:
                raise ValueError("tolerance must be a positive number")
        return value

    def tolerance_for(self, residual: str) -> float | None:
        if isinstance(self.tolerance, dict):
            return self.tolerance.get(residual)
        return self.tolerance
