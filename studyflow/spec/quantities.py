"""Schema of the ``quantities:`` block: what to collect from each case and how.

Each quantity names a collector by ``from:``; the keys shared by every collector (``file``, ``unit``,
``series``) are checked here. The collector-specific options are checked against that collector's
own options model by ``studyflow.collect.check_quantities`` (the collection layer owns the readers,
and this layer may not import upward); ``studyflow.api`` runs that check when a study is loaded, so
a bad option still fails before anything is rendered or run.
"""

from __future__ import annotations

import re
from typing import Any

from pydantic import BaseModel, ConfigDict, Field

# Quantity names become table values and record keys; keep them plain so CSV and Parquet agree.
QUANTITY_NAME = re.compile(r"^[A-Za-z_][A-Za-z0-9_.\-]*$")


class QuantitySpec(BaseModel):
    """One monitored quantity. ``from`` picks the collector; the other keys are its options."""

    model_config = ConfigDict(extra="allow", populate_by_name=True, frozen=True)

    source: str = Field(alias="from", min_length=1, description="collector name, e.g. json, csv, log, field")
    # Paths leaving the case folder are refused by spec.checks (with the file's line) and again,
    # links included, when the collector opens the file.
    file: str = Field(min_length=1, description="file inside the case folder, relative to it")
    unit: str = "-"
    series: bool = Field(False, description="a history (one value per iteration), not a final value")
    description: str = ""

    def options(self) -> dict[str, Any]:
        """The collector-specific options (everything but the common keys)."""
        return dict(self.model_extra or {})

