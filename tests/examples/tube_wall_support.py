"""Shared set-up of the example tests: the tube-wall template and the duct-lining study.

These tests run real open-source tools (gmsh, FiPy). They are skipped, with the reason, only where
the optional ``examples`` extra is not installed.
"""

from __future__ import annotations

import importlib.util
import math
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[2]
TEMPLATE = REPO / "templates" / "tube-wall"
STUDY = REPO / "studies" / "duct-lining"

MISSING = [name for name in ("gmsh", "fipy") if importlib.util.find_spec(name) is None]
needs_tools = pytest.mark.skipif(
    bool(MISSING),
    reason=f"needs the optional 'examples' extra (pip install 'studyflow[examples]'): "
    f"{', '.join(MISSING)} not importable",
)

# The duct-lining study's inputs (studies/duct-lining/study.yaml), repeated here on purpose: the
# exact answer must come from outside the code under test.
R_INNER, R_OUTER = 1.0, 2.0  # m
CONDUCTIVITY = 1.2  # W/(m K)
T_INNER, T_OUTER = 850.0, 60.0  # C


def exact_heat_flow(k: float = CONDUCTIVITY, t1: float = T_INNER, t2: float = T_OUTER,
                    r1: float = R_INNER, r2: float = R_OUTER) -> float:
    """Heat flow per unit length through a cylindrical wall, q' = 2 pi k (T1 - T2) / ln(r2 / r1).

    Source: Incropera and DeWitt, Fundamentals of Heat and Mass Transfer, chapter 3 (one-dimensional
    steady conduction, radial systems), the cylinder result with the conduction resistance
    ln(r2/r1) / (2 pi L k); Eq. 3.27 in the 6th edition, from memory.
    """
    return 2.0 * math.pi * k * (t1 - t2) / math.log(r2 / r1)
