"""What every reader shares: the options base model and number parsing."""

from __future__ import annotations

import re
from typing import Any

from pydantic import BaseModel, ConfigDict

from ..values import ReadFailure

# Fortran-style exponents (1.0D-05) are common in solver logs and tables.
_FORTRAN_EXP = re.compile(r"(?<=[0-9.])[dD](?=[+\-]?[0-9])")


class ReaderOptions(BaseModel):
    """Base of the built-in options models. Unknown keys are errors, so a typo in the study file
    (``colum:``) is caught before anything runs."""

    model_config = ConfigDict(extra="forbid", frozen=True, populate_by_name=True)

    series: bool = False


def to_number(raw: Any, key: str) -> float:
    """Convert a value read from a file to a float; booleans count as 1/0 (convergence flags).

    Non-finite numbers are returned as they are: the case collector rejects them with the quantity's
    reason, so every reader reports NaN and inf the same way.
    """
    if isinstance(raw, bool):
        return 1.0 if raw else 0.0
    if isinstance(raw, (int, float)):
        return float(raw)
    if raw is None:
        raise ReadFailure("no value (null)", key, None)
    if isinstance(raw, str):
        text = _FORTRAN_EXP.sub("e", raw.strip())
        low = text.lower()
        if low in ("true", "false"):
            return 1.0 if low == "true" else 0.0
        try:
            return float(text)
        except ValueError:
            raise ReadFailure("not a number", key, raw) from None
    if hasattr(raw, "item") and getattr(raw, "size", 2) == 1:  # numpy scalars and 1-element arrays
        return to_number(raw.item(), key)
    raise ReadFailure(f"expected a number, found {type(raw).__name__}", key, raw)


def to_numbers(raw: Any, key: str) -> list[float]:
    if not isinstance(raw, (list, tuple)):
        raise ReadFailure(f"expected a list of numbers, found {type(raw).__name__}", key, raw)
    return [to_number(v, f"{key}[{i}]") for i, v in enumerate(raw)]
