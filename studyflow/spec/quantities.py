"""Schema of the ``quantities:`` block: what to collect from each case and how.

Each entry names a collector by ``from:``; the built-in collectors' options are checked here so a
bad study file fails before anything runs. Collectors added through the ``studyflow.collectors``
entry-point group are accepted with free options and checked by the collection layer.
"""

from __future__ import annotations

from typing import Any

from pydantic import BaseModel, ConfigDict, Field


class QuantitySpec(BaseModel):
    """One monitored quantity. ``from`` picks the collector; the other keys are its options."""

    model_config = ConfigDict(extra="allow", populate_by_name=True, frozen=True)

    source: str = Field(alias="from", description="collector name, e.g. json, csv, log, field")
    file: str = Field(description="file inside the case folder")
    unit: str = "-"
    series: bool = Field(False, description="a history (one value per iteration), not a final value")

    def options(self) -> dict[str, Any]:
        """The collector-specific options (everything but the common keys)."""
        return dict(self.model_extra or {})
