"""The schema of ``study.yaml`` as pydantic v2 models.

The models check shapes and single values; rules that tie several keys together (unique names,
paths that stay inside a case, the template folder existing, equal zip lengths, ...) live in
``checks.py`` so that every problem of a file is reported in one go. ``Study.model_json_schema()``
is the JSON Schema of the file (``studyflow schema`` prints it).
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Annotated, Any, Literal, Union

from pydantic import BaseModel, ConfigDict, Field, PrivateAttr, field_validator

from .quantities import QuantitySpec

def _check_scalar(value: Any) -> Any:
    if isinstance(value, float) and not math.isfinite(value):
        raise ValueError("must be a finite number")
    if not isinstance(value, (bool, int, float, str)):
        raise ValueError("must be a number, a string or a boolean")
    return value


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True, populate_by_name=True)


class ProductBlock(_Strict):
    """Full factorial: every combination of the listed values."""

    kind: Literal["product"]
    values: dict[str, list[Any]] = Field(min_length=1)

    @field_validator("values")
    @classmethod
    def _scalars(cls, v: dict[str, list[Any]]) -> dict[str, list[Any]]:
        for name, items in v.items():
            if not items:
                raise ValueError(f"values.{name} must list at least one value")
            for item in items:
                _check_scalar(item)
        return v


class ZipBlock(_Strict):
    """Lists of equal length taken together: point i takes item i of every list."""

    kind: Literal["zip"]
    values: dict[str, list[Any]] = Field(min_length=1)

    @field_validator("values")
    @classmethod
    def _scalars(cls, v: dict[str, list[Any]]) -> dict[str, list[Any]]:
        for items in v.values():
            for item in items:
                _check_scalar(item)
        return v


class TableBlock(_Strict):
    """Explicit points; an optional ``id`` names a point (otherwise it is built from its values)."""

    kind: Literal["table"]
    points: list[dict[str, Any]] = Field(min_length=1)


class OneAtATimeBlock(_Strict):
    """The base point, then each listed value of each parameter with the others at their base."""

    kind: Literal["one-at-a-time"]
    base: dict[str, Any] = Field(min_length=1)
    vary: dict[str, list[Any]] = Field(min_length=1)

    @field_validator("base")
    @classmethod
    def _base(cls, v: dict[str, Any]) -> dict[str, Any]:
        for item in v.values():
            _check_scalar(item)
        return v

    @field_validator("vary")
    @classmethod
    def _vary(cls, v: dict[str, list[Any]]) -> dict[str, list[Any]]:
        for items in v.values():
            for item in items:
                _check_scalar(item)
        return v


class Range(_Strict):
    low: float
    high: float
    scale: Literal["linear", "log"] = "linear"


class SampledBlock(_Strict):
    """Latin hypercube or Sobol samples over ranges (``scipy.stats.qmc``), reproducible by ``seed``."""

    kind: Literal["lhs", "sobol"]
    samples: int = Field(gt=0, le=1_000_000)
    seed: int = 0
    ranges: dict[str, Range] = Field(min_length=1)


ParameterBlock = Annotated[
    Union[ProductBlock, ZipBlock, TableBlock, OneAtATimeBlock, SampledBlock],
    Field(discriminator="kind"),
]


class MeshSpec(_Strict):
    """The mesh family. Level 0 is the coarsest.

    Either ``counts`` (cells per direction on level 0, multiplied by the ratio per level), or
    ``spacings`` (lengths on level 0, divided by the ratio), or ``list`` (explicit levels).
    """

    levels: int | None = Field(None, ge=1, le=20)
    ratio: Any = 2
    counts: dict[str, float] | None = None
    spacings: dict[str, float] | None = None
    list_: list[dict[str, float]] | None = Field(None, alias="list")
    extent: list[float] | None = None
    h: float | None = Field(None, gt=0, description="representative cell size of level 0 (counts/spacings)")
    dim: int | None = Field(None, ge=1, le=3)
    cells_from: str | None = None
    measure: float | None = Field(None, gt=0)

    @field_validator("ratio")
    @classmethod
    def _ratio(cls, v: Any) -> Any:
        items = v if isinstance(v, list) else [v]
        if not items:
            raise ValueError("must be a number or a non-empty list of numbers")
        for r in items:
            if isinstance(r, bool) or not isinstance(r, (int, float)):
                raise ValueError("must be a number or a list of numbers")
            if not (math.isfinite(r) and r > 1):
                raise ValueError("every refinement ratio must be greater than 1")
        return v

    def ratios(self) -> list[float]:
        """Per-step ratios: ``ratios()[k]`` refines level k into level k+1."""
        n = self.level_count()
        if isinstance(self.ratio, list):
            return [float(r) for r in self.ratio]
        return [float(self.ratio)] * max(n - 1, 0)

    def level_count(self) -> int:
        if self.list_ is not None:
            return len(self.list_)
        if self.levels is not None:
            return self.levels
        if isinstance(self.ratio, list):
            return len(self.ratio) + 1
        return 1


class StepSpec(_Strict):
    """One command run inside the case folder; its own Snakemake job."""

    name: str
    run: Any = Field(description="a command string (split like a shell would, then each token rendered) "
                                 "or a list of argument templates")
    reads: list[str] = []
    writes: list[str] = []
    time_min: float | None = Field(None, gt=0, description="wall-time limit, overrides resources.time_min")
    cores: int | None = Field(None, ge=1)
    memory_mb: int | None = Field(None, ge=1)

    @field_validator("run")
    @classmethod
    def _run(cls, v: Any) -> Any:
        if isinstance(v, str):
            if not v.strip():
                raise ValueError("must not be empty")
            return v
        if isinstance(v, list) and v and all(isinstance(t, (str, int, float)) and not isinstance(t, bool)
                                             for t in v):
            return [str(t) for t in v]
        raise ValueError("must be a command string or a non-empty list of arguments")


class IterationSpec(_Strict):
    residuals: list[str] = []
    tolerance: float | None = Field(None, gt=0)
    flag: str | None = None


class Resources(_Strict):
    cores: int = Field(1, ge=1)
    memory_mb: int | None = Field(None, ge=1)
    time_min: float | None = Field(None, gt=0)


class ClusterSpec(BaseModel):
    """Cluster settings; ``batch`` packs that many cases into one scheduler job. Other keys are
    checked by ``studyflow.cluster``."""

    model_config = ConfigDict(extra="allow", frozen=True)
    batch: int | None = Field(None, ge=1)


class AnalysisSpec(BaseModel):
    model_config = ConfigDict(extra="allow", frozen=True)
    formal_order: float | None = Field(None, gt=0)
    safety_factor: float | None = Field(None, gt=0)


class Study(_Strict):
    """A whole study file. After ``load_study`` it also knows where it lives (``file``, ``root``)."""

    title: str = ""
    description: str = ""
    template: str
    constants: dict[str, Any] = {}
    parameters: list[ParameterBlock] = []
    mesh: MeshSpec | None = None
    steps: list[StepSpec] = Field(min_length=1)
    quantities: dict[str, QuantitySpec] = {}
    iteration: IterationSpec | None = None
    resources: Resources = Resources()
    retries: int = Field(0, ge=0, le=20)
    cluster: ClusterSpec | None = None
    analysis: AnalysisSpec | None = None
    report: dict[str, Any] | None = Field(None, description="report settings, checked by studyflow.report")
    audit: dict[str, Any] | None = Field(None, description="reviewer-audit tolerances, checked by studyflow.bundle")

    _file: Path | None = PrivateAttr(None)

    # Where the study lives ------------------------------------------------------------------
    @property
    def file(self) -> Path:
        if self._file is None:
            raise AttributeError("this Study was not loaded from a file")
        return self._file

    @property
    def root(self) -> Path:
        """The study folder (holds study.yaml, cases/, results/, .studyflow/)."""
        return self.file.parent

    @property
    def template_dir(self) -> Path:
        return (self.root / self.template).resolve()

    @property
    def cases_dir(self) -> Path:
        return self.root / "cases"

    @property
    def state_dir(self) -> Path:
        return self.root / ".studyflow"

    @property
    def name(self) -> str:
        return self.root.name

    def step_names(self) -> list[str]:
        return [s.name for s in self.steps]

    def time_limit_s(self, step: StepSpec) -> float | None:
        minutes = step.time_min if step.time_min is not None else self.resources.time_min
        return None if minutes is None else float(minutes) * 60.0
