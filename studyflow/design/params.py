"""Parameter spaces: each block of ``parameters:`` expands to a list of points.

A point is a ``dict`` from parameter name to value, plus an optional explicit id (table blocks).
Blocks are concatenated in file order; an exact repeat of an earlier point is dropped, so the base
point of a one-at-a-time block does not run twice when another block already has it.
"""

from __future__ import annotations

import itertools
import json
import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from ..spec.model import OneAtATimeBlock, ProductBlock, SampledBlock, Study, TableBlock, ZipBlock


@dataclass(frozen=True)
class RawPoint:
    values: tuple[tuple[str, Any], ...]  # in declaration order
    given_id: str | None = None
    block: int = 0

    def as_dict(self) -> dict[str, Any]:
        return dict(self.values)

    def key(self) -> str:
        """Canonical text of the values, equal for equal points whatever the order of names."""
        return json.dumps(dict(sorted(self.values)), sort_keys=True, separators=(",", ":"))


def _product(block: ProductBlock, i: int) -> list[RawPoint]:
    names = list(block.values)
    return [RawPoint(tuple(zip(names, combo)), block=i)
            for combo in itertools.product(*(block.values[n] for n in names))]


def _zip(block: ZipBlock, i: int) -> list[RawPoint]:
    names = list(block.values)
    return [RawPoint(tuple(zip(names, row)), block=i) for row in zip(*(block.values[n] for n in names))]


def _table(block: TableBlock, i: int) -> list[RawPoint]:
    return [RawPoint(tuple((k, v) for k, v in p.items() if k != "id"), p.get("id"), block=i)
            for p in block.points]


def _one_at_a_time(block: OneAtATimeBlock, i: int) -> list[RawPoint]:
    names = list(block.base)
    out = [RawPoint(tuple(block.base.items()), block=i)]
    for name, values in block.vary.items():
        for v in values:
            out.append(RawPoint(tuple((n, v if n == name else block.base[n]) for n in names), block=i))
    return out


def unit_samples(kind: str, samples: int, dim: int, seed: int) -> np.ndarray:
    """``samples`` x ``dim`` points in the unit cube from ``scipy.stats.qmc``.

    Latin hypercube (McKay, Beckman & Conover 1979) or a scrambled Sobol sequence (Sobol 1967;
    Owen scrambling), seeded so a study gives the same points on every machine.
    """
    import warnings

    from scipy.stats import qmc

    engine = qmc.LatinHypercube(d=dim, rng=seed) if kind == "lhs" else qmc.Sobol(d=dim, scramble=True, rng=seed)
    with warnings.catch_warnings():
        # Sobol balance properties need a power of two; other counts are still valid samples.
        warnings.simplefilter("ignore", UserWarning)
        return engine.random(samples)


def scale_samples(u: np.ndarray, low: float, high: float, scale: str) -> np.ndarray:
    """Map unit samples to ``[low, high]``: linear, or uniform in log(x) for ``scale: log``."""
    if scale == "log":
        return np.exp(math.log(low) + u * (math.log(high) - math.log(low)))
    return low + u * (high - low)


def _sampled(block: SampledBlock, i: int) -> list[RawPoint]:
    names = list(block.ranges)
    u = unit_samples(block.kind, block.samples, len(names), block.seed)
    cols = [scale_samples(u[:, j], r.low, r.high, r.scale) for j, r in enumerate(block.ranges.values())]
    return [RawPoint(tuple((n, float(cols[j][k])) for j, n in enumerate(names)), block=i)
            for k in range(block.samples)]


EXPANDERS = {
    "product": _product, "zip": _zip, "table": _table, "one-at-a-time": _one_at_a_time,
    "lhs": _sampled, "sobol": _sampled,
}


def expand_points(study: Study) -> list[RawPoint]:
    """All points of the study in file order, exact repeats dropped; one empty point if none."""
    points: list[RawPoint] = []
    seen: set[str] = set()
    for i, block in enumerate(study.parameters):
        for p in EXPANDERS[block.kind](block, i):
            k = p.key()
            if p.given_id is None and k in seen:
                continue
            seen.add(k)
            points.append(p)
    return points or [RawPoint(())]
