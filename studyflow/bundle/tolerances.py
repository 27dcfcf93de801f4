"""The tolerances an audit compares re-run numbers with, from the study's optional ``audit:`` block.

```yaml
audit:
  rtol: 1.0e-6            # relative, on the shipped value
  atol: 1.0e-12           # absolute
  per_quantity:           # overrides for single quantities
    drag: {rtol: 1.0e-4}
    mass_residual: {rtol: 0.05, atol: 1.0e-10}
  uncertainty: {rtol: 1.0e-9, atol: 1.0e-12}   # for the re-computed uncertainty table
  ignore: [wall_time]     # quantities no re-run reproduces: listed, not compared
```

A number passes when ``|new - shipped| <= atol + rtol * |shipped|``, the test of
``numpy.isclose`` (NumPy reference documentation) with the shipped value as reference.
NaN matches only NaN and an infinity only the same infinity.
"""

from __future__ import annotations

import math
from typing import Any

from pydantic import BaseModel, ConfigDict, Field, ValidationError

from ..errors import InputError, Problem

# Defaults: a deterministic solver re-run with the same inputs on another machine differs in
# round-off only, far below 1e-6 relative; 1e-12 absolute keeps exact zeros from failing on
# round-off (common practice).
DEFAULT_RTOL = 1.0e-6
DEFAULT_ATOL = 1.0e-12


class Tolerance(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)
    rtol: float | None = Field(None, ge=0)
    atol: float | None = Field(None, ge=0)


class AuditSettings(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)
    rtol: float = Field(DEFAULT_RTOL, ge=0)
    atol: float = Field(DEFAULT_ATOL, ge=0)
    per_quantity: dict[str, Tolerance] = {}
    uncertainty: Tolerance = Tolerance()
    ignore: list[str] = Field([], description="quantities a re-run cannot reproduce (wall times, host "
                                              "names): listed in the report, not compared")

    def for_quantity(self, name: str) -> tuple[float, float]:
        own = self.per_quantity.get(name)
        rtol = own.rtol if own is not None and own.rtol is not None else self.rtol
        atol = own.atol if own is not None and own.atol is not None else self.atol
        return rtol, atol

    def for_uncertainty(self) -> tuple[float, float]:
        u = self.uncertainty
        return (u.rtol if u.rtol is not None else self.rtol, u.atol if u.atol is not None else self.atol)


def settings_from(raw_block: Any, file: str = "study.yaml", quantities: Any = None) -> AuditSettings:
    """Validate the ``audit:`` block (a mapping or None) into settings, naming any bad key.

    With ``quantities`` (the study's quantity names) a name in ``per_quantity`` or ``ignore``
    that is not one of them is an error too: a typo would otherwise silently do nothing."""
    if raw_block is None:
        return AuditSettings()
    if hasattr(raw_block, "model_dump"):
        raw_block = raw_block.model_dump(exclude_none=True)
    try:
        settings = AuditSettings.model_validate(raw_block)
    except ValidationError as exc:
        problems = [Problem(file, "audit." + ".".join(str(p) for p in err["loc"]), err.get("input"), err["msg"])
                    for err in exc.errors()]
        raise InputError(problems) from exc
    if quantities is not None:
        known = set(quantities)
        problems = [Problem(file, f"audit.per_quantity.{n}", n, f"no quantity {n!r} in the study")
                    for n in settings.per_quantity if n not in known]
        problems += [Problem(file, f"audit.ignore[{i}]", n, f"no quantity {n!r} in the study")
                     for i, n in enumerate(settings.ignore) if n not in known]
        if problems:
            raise InputError(problems)
    return settings


def close(new: float, shipped: float, rtol: float, atol: float) -> bool:
    """``|new - shipped| <= atol + rtol * |shipped|`` (numpy.isclose's test), NaN only equal to NaN."""
    if math.isnan(shipped) or math.isnan(new):
        return math.isnan(shipped) and math.isnan(new)
    if math.isinf(shipped) or math.isinf(new):
        return new == shipped
    return abs(new - shipped) <= atol + rtol * abs(shipped)
