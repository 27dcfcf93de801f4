"""Study spec: the schema of study.yaml and its loader."""

from .loader import STUDY_FILE, load_study, study_file
from .model import (
    MeshSpec,
    OneAtATimeBlock,
    ProductBlock,
    Range,
    SampledBlock,
    StepSpec,
    Study,
    TableBlock,
    ZipBlock,
)
from .quantities import QuantitySpec

__all__ = [
    "STUDY_FILE", "load_study", "study_file", "Study", "StepSpec", "MeshSpec", "ProductBlock", "ZipBlock",
    "TableBlock", "OneAtATimeBlock", "SampledBlock", "Range", "QuantitySpec",
]
