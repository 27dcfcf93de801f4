"""The case file: TOML (read with tomllib), validated into a frozen ``CaseConfig``.

Every problem found is reported together, each naming the file, the key and the bad value.
Tables and keys (defaults in brackets):

    [case]    kind = "plate" | "cavity" | "channel" | "mms" | "step";  reynolds (per kind, below)
    [domain]  plate: upstream [1.0], height [3.0], buffer [0.5] in plate lengths,
              inlet ["total_pressure" | "velocity"], top ["open" | "slip"]
              channel: length [10.0] in channel heights; step: length [15.0] in outlet heights
    [mesh]    nx, ny (cells); stretch_x, stretch_y: size ratio of the far-end to the near-end
              cell of each stretched segment (1 = uniform)
    [solve]   tolerance [1e-10], max_iterations [40], update_tolerance [0 = not used],
              chord [true], coarse_levels [-1 = automatic], divergence_limit [1e6],
              ramp [[]]: lower Reynolds numbers solved first on the coarsest mesh (continuation),
              linear_solver ["auto" | "mumps" | "superlu"]: sparse LU backend (auto: MUMPS if usable)
    [output]  fields ["fields.vtu"], metrics ["metrics.json"], history ["history.csv"],
              monitors ["monitors.csv"]
    [plate]   stations [0.1 .. 1.0], profile_stations [[0.5]]
    [channel] profile_station [0.8], gradient_from [0.6], gradient_to [0.9]  (fractions of length)
"""

from __future__ import annotations

import math
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from .errors import CaseFileError, Issue
from .linear import CHOICES as LINEAR_SOLVERS

KINDS = ("plate", "cavity", "channel", "mms", "step")

# Per kind: default Reynolds number and mesh stretching (tuned once, documented in the templates).
DEFAULT_RE = {"plate": 1.0e4, "cavity": 100.0, "channel": 50.0, "mms": 50.0, "step": 100.0}
DEFAULT_STRETCH = {"plate": (300.0, 3000.0), "cavity": (1.0, 1.0), "channel": (4.0, 2.0), "mms": (1.0, 1.0), "step": (4.0, 1.0)}


@dataclass(frozen=True)
class CaseConfig:
    path: str
    kind: str
    reynolds: float
    nx: int
    ny: int
    stretch_x: float
    stretch_y: float
    domain: dict[str, float]
    tolerance: float = 1e-10
    max_iterations: int = 40
    update_tolerance: float = 0.0
    chord: bool = True
    coarse_levels: int = -1
    divergence_limit: float = 1e6
    ramp: tuple[float, ...] = ()
    linear_solver: str = "auto"
    fields: str = "fields.vtu"
    metrics: str = "metrics.json"
    history: str = "history.csv"
    monitors: str = "monitors.csv"
    extra: dict[str, Any] = field(default_factory=dict)



def _is_num(v: Any) -> bool:
    return isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v)


class _Reader:
    def __init__(self, file: str, data: dict):
        self.file = file
        self.data = data
        self.issues: list[Issue] = []
        self.seen: dict[str, set[str]] = {}

    def table(self, name: str) -> dict:
        t = self.data.get(name, {})
        if not isinstance(t, dict):
            self.issues.append(Issue(self.file, name, t, "must be a table"))
            return {}
        self.seen.setdefault(name, set())
        return t

    def get(self, tname: str, key: str, default: Any, check: str, **lim: Any) -> Any:
        t = self.table(tname)
        self.seen.setdefault(tname, set()).add(key)
        where = f"{tname}.{key}"
        if key not in t:
            if default is _REQUIRED:
                self.issues.append(Issue(self.file, where, None, "is required"))
            return None if default is _REQUIRED else default
        v = t[key]
        bad = None
        if check == "int":
            if not isinstance(v, int) or isinstance(v, bool):
                bad = "must be an integer"
            elif v < lim.get("min", -math.inf) or v > lim.get("max", math.inf):
                bad = f"must be between {lim.get('min')} and {lim.get('max')}"
        elif check == "pos":
            if not _is_num(v) or v <= 0:
                bad = "must be a positive finite number"
            elif v < lim.get("min", -math.inf) or v > lim.get("max", math.inf):
                bad = f"must be between {lim.get('min')} and {lim.get('max')}"
        elif check == "nonneg":
            if not _is_num(v) or v < 0:
                bad = "must be a finite number >= 0"
        elif check == "bool":
            if not isinstance(v, bool):
                bad = "must be true or false"
        elif check == "str":
            if not isinstance(v, str) or not v.strip():
                bad = "must be a non-empty string"
            elif "choices" in lim and v not in lim["choices"]:
                bad = f"must be one of {', '.join(lim['choices'])}"
        elif check == "file":
            if not isinstance(v, str) or not v.strip() or Path(v).is_absolute() or ".." in Path(v).parts:
                bad = "must be a relative file name inside the case folder"
        elif check == "ramp":
            if not isinstance(v, list) or not all(_is_num(s) and s > 0 for s in v) or v != sorted(v):
                bad = "must be an increasing list of positive Reynolds numbers"
        elif check == "fractions":
            if (not isinstance(v, list) or not v or not all(_is_num(s) and lim["lo"] < s <= lim["hi"] for s in v)):
                bad = f"must be a non-empty list of numbers in ({lim['lo']}, {lim['hi']}]"
        if bad:
            self.issues.append(Issue(self.file, where, v, bad))
            return default if default is not _REQUIRED else None
        return float(v) if check in ("pos", "nonneg") else v

    def unknown_keys(self) -> None:
        for tname, t in self.data.items():
            if tname not in self.seen:
                self.issues.append(Issue(self.file, tname, t if not isinstance(t, dict) else "{...}",
                                         "unknown table for this case kind"))
                continue
            if isinstance(t, dict):
                for key in t:
                    if key not in self.seen[tname]:
                        self.issues.append(Issue(self.file, f"{tname}.{key}", t[key], "unknown key"))


_REQUIRED = object()


def load(path: str | Path) -> CaseConfig:
    """Read and validate a case file; raise ``CaseFileError`` listing every problem."""
    file = str(path)
    try:
        text = Path(path).read_bytes()
    except OSError as exc:
        raise CaseFileError(Issue(file, "", str(path), f"cannot read the case file: {exc.strerror}")) from exc
    try:
        data = tomllib.loads(text.decode("utf-8"))
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
        raise CaseFileError(Issue(file, "", str(path), f"not valid TOML: {exc}")) from exc
    return parse(data, file)


def parse(data: dict, file: str = "<case>") -> CaseConfig:
    r = _Reader(file, data)
    kind = r.get("case", "kind", _REQUIRED, "str", choices=KINDS)
    if kind not in KINDS:
        raise CaseFileError(r.issues)
    re_ = r.get("case", "reynolds", DEFAULT_RE[kind], "pos", min=1e-3, max=1e7)
    nx = r.get("mesh", "nx", _REQUIRED, "int", min=4, max=4096)
    ny = r.get("mesh", "ny", _REQUIRED, "int", min=4, max=4096)
    sx0, sy0 = DEFAULT_STRETCH[kind]
    sx = r.get("mesh", "stretch_x", sx0, "pos", min=1.0, max=1e4)
    sy = r.get("mesh", "stretch_y", sy0, "pos", min=1.0, max=1e5)
    domain: dict[str, float] = {}
    extra: dict[str, Any] = {}
    if kind == "plate":
        domain["upstream"] = r.get("domain", "upstream", 1.0, "pos", min=0.05, max=100)
        domain["height"] = r.get("domain", "height", 3.0, "pos", min=0.05, max=100)
        domain["buffer"] = r.get("domain", "buffer", 0.5, "pos", min=0.01, max=100)
        extra["inlet"] = r.get("domain", "inlet", "total_pressure", "str", choices=("total_pressure", "velocity"))
        extra["top"] = r.get("domain", "top", "open", "str", choices=("open", "slip"))
        extra["stations"] = r.get("plate", "stations", [0.1 * k for k in range(1, 11)], "fractions", lo=0.0, hi=1.0)
        extra["profile_stations"] = r.get("plate", "profile_stations", [0.5], "fractions", lo=0.0, hi=1.0)
        if isinstance(nx, int) and nx < 16:
            r.issues.append(Issue(file, "mesh.nx", nx, "the plate needs at least 16 cells along x"))
    elif kind == "step":
        domain["length"] = r.get("domain", "length", 15.0, "pos", min=1.0, max=1000)
    elif kind == "channel":
        domain["length"] = r.get("domain", "length", 10.0, "pos", min=0.5, max=1000)
        extra["profile_station"] = r.get("channel", "profile_station", 0.8, "pos", max=1.0)
        extra["gradient_from"] = r.get("channel", "gradient_from", 0.6, "pos", max=1.0)
        extra["gradient_to"] = r.get("channel", "gradient_to", 0.9, "pos", max=1.0)
        if extra["gradient_from"] >= extra["gradient_to"]:
            r.issues.append(Issue(file, "channel.gradient_to", extra["gradient_to"],
                                  "must be larger than channel.gradient_from"))
    for name, n in (("nx", nx), ("ny", ny)):
        two_sided = (kind in ("cavity", "mms") or (kind in ("channel", "step") and name == "ny"))
        if two_sided and isinstance(n, int) and n % 2:
            r.issues.append(Issue(file, f"mesh.{name}", n, f"must be even for the {kind} case"
                                  " (centre lines lie on faces)"))
    tol = r.get("solve", "tolerance", 1e-10, "pos", max=1.0)
    maxit = r.get("solve", "max_iterations", 40, "int", min=0, max=10000)
    utol = r.get("solve", "update_tolerance", 0.0, "nonneg")
    chord = r.get("solve", "chord", True, "bool")
    coarse = r.get("solve", "coarse_levels", -1, "int", min=-1, max=8)
    div = r.get("solve", "divergence_limit", 1e6, "pos", min=1.0)
    ramp = r.get("solve", "ramp", [], "ramp")
    linear_solver = r.get("solve", "linear_solver", "auto", "str", choices=LINEAR_SOLVERS)
    if isinstance(ramp, list) and isinstance(re_, float) and any(v >= re_ for v in ramp):
        r.issues.append(Issue(file, "solve.ramp", ramp, f"every step must be below case.reynolds = {re_:g}"))
    fields_ = r.get("output", "fields", "fields.vtu", "file")
    metrics = r.get("output", "metrics", "metrics.json", "file")
    history = r.get("output", "history", "history.csv", "file")
    monitors = r.get("output", "monitors", "monitors.csv", "file")
    r.unknown_keys()
    if r.issues:
        raise CaseFileError(r.issues)
    return CaseConfig(file, kind, re_, nx, ny, sx, sy, domain, tol, maxit, utol, chord, coarse, div,
                      tuple(float(v) for v in ramp), linear_solver, fields_, metrics, history, monitors, extra)
