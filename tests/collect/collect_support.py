"""Helpers shared by the collection tests (imported by bare name, like the other test folders' helpers)."""

from __future__ import annotations

from typing import Any

from studyflow.collect import check_quantities
from studyflow.spec.quantities import QuantitySpec


def bind_one(options: dict[str, Any], name: str = "q"):
    """A quantity bound to its collector from study-file style options (checked like a study file)."""
    spec = QuantitySpec.model_validate(options)
    return check_quantities({name: spec}, file="study.yaml")[name]
