"""Checking the ``quantities:`` block against each collector's own options model.

Runs when a study is loaded (through ``studyflow.api``) and again before a collection, so a bad
option is reported, with every other problem, before anything is rendered, run or read.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

from pydantic import BaseModel, ValidationError

from ..design import mesh_dim as design_mesh_dim
from ..errors import CollectError, Problem
from ..spec.quantities import QUANTITY_NAME, QuantitySpec
from . import registry
from .columns import RESERVED

# Columns of the results table a parameter or quantity must not shadow.
RESERVED_COLUMNS = RESERVED


@dataclass(frozen=True)
class Bound:
    """A quantity with its collector and validated options, ready to read."""

    name: str
    spec: QuantitySpec
    collector: registry.Collector
    options: BaseModel


def _options_input(spec: QuantitySpec, model: type[BaseModel]) -> dict[str, Any]:
    data = spec.options()
    if "series" in model.model_fields:
        data["series"] = spec.series
    return data


def _loc(loc: tuple[Any, ...]) -> str:
    out = ""
    for part in loc:
        out += f"[{part}]" if isinstance(part, int) else f".{part}"
    return out


def bind(quantities: Mapping[str, QuantitySpec], file: str = "study.yaml") -> tuple[dict[str, Bound], list[Problem]]:
    """Validate every quantity's options; return the bound quantities and every problem found."""
    bound: dict[str, Bound] = {}
    problems: list[Problem] = []
    for name, spec in quantities.items():
        where = f"quantities.{name}"
        if not QUANTITY_NAME.match(name):
            problems.append(Problem(file, where, name, "a quantity name is letters, digits, _ . - and starts "
                                                        "with a letter or _"))
        if name in RESERVED_COLUMNS:
            problems.append(Problem(file, where, name, "this name is a column of the results table; choose another"))
        try:
            coll = registry.get(spec.source)
        except KeyError:
            problems.append(Problem(file, f"{where}.from", spec.source,
                                    f"no such collector; known: {', '.join(registry.names())}"))
            continue
        except CollectError as exc:
            problems.extend(exc.problems)
            continue
        try:
            opts = coll.options.model_validate(_options_input(spec, coll.options))
        except ValidationError as exc:
            for err in exc.errors():
                loc = tuple(err.get("loc", ()))
                value = err.get("input")
                if err.get("type") == "missing":
                    value = None
                msg = err.get("msg", "invalid").removeprefix("Value error, ")
                if err.get("type") == "extra_forbidden":
                    msg = "unknown option for collector " + repr(spec.source)
                problems.append(Problem(file, where + _loc(loc), value, msg))
            continue
        bound[name] = Bound(name, spec, coll, opts)
    return bound, problems


def cross_problems(quantities: Mapping[str, QuantitySpec], iteration: Any, mesh: Any,
                   parameters: list[str] | tuple[str, ...] = (), file: str = "study.yaml") -> list[Problem]:
    """Problems that tie the quantities to the ``iteration:`` and ``mesh:`` blocks and the parameters."""
    problems: list[Problem] = []
    if iteration is not None:
        for i, res in enumerate(getattr(iteration, "residuals", []) or []):
            if res not in quantities:
                problems.append(Problem(file, f"iteration.residuals[{i}]", res, "is not a quantity of this study"))
        # ``flag`` may name a quantity that is not declared: then it is never present, and the
        # residuals decide (the spec layer allows this too).
        tol = getattr(iteration, "tolerance", None)
        if getattr(iteration, "residuals", None) and tol is None:
            problems.append(Problem(file, "iteration.tolerance", None, "residuals are listed, so a tolerance is needed"))
        if isinstance(tol, dict):
            for res in tol:
                if res not in (iteration.residuals or []):
                    problems.append(Problem(file, f"iteration.tolerance.{res}", res, "is not one of iteration.residuals"))
    if mesh is not None and getattr(mesh, "cells_from", None) is not None:
        name = mesh.cells_from
        spec = quantities.get(name)
        if spec is None:
            problems.append(Problem(file, "mesh.cells_from", name, "is not a quantity of this study"))
        elif spec.series:
            problems.append(Problem(file, "mesh.cells_from", name, "must be a single value, not a series"))
        if getattr(mesh, "measure", None) is None:
            problems.append(Problem(file, "mesh.measure", None, "cells_from needs the domain's measure "
                                                                "(its length, area or volume)"))
        if design_mesh_dim(mesh) is None:
            problems.append(Problem(file, "mesh.dim", None, "cells_from needs the number of dimensions "
                                                            "(mesh.dim, or extent/counts/spacings to count them)"))
    for p in parameters:
        if p in RESERVED_COLUMNS:
            problems.append(Problem(file, "parameters", p, "this parameter name is a column of the results "
                                                            "table; choose another"))
        elif p in quantities:
            problems.append(Problem(file, f"quantities.{p}", p, "a parameter has this name; choose another"))
    return problems


def check_quantities(quantities: Mapping[str, QuantitySpec], *, iteration: Any = None, mesh: Any = None,
                     parameters: list[str] | tuple[str, ...] = (), file: str = "study.yaml") -> dict[str, Bound]:
    """Validate the ``quantities:`` block (and its ties to ``iteration:``/``mesh:``) or raise one
    ``CollectError`` listing every problem, each as ``file: quantities.<name>.<option>: message (got value)``."""
    bound, problems = bind(quantities, file)
    problems += cross_problems(quantities, iteration, mesh, parameters, file)
    if problems:
        raise CollectError(problems, headline=f"{file}: the quantities to collect are not valid")
    return bound
