"""One case from configuration to files: mesh sequence, Newton solve, metrics, outputs."""

from __future__ import annotations

import dataclasses
import time
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

import numpy as np

from . import __version__, linear, metrics, output
from .cases import Problem, auto_levels, build, coarser
from .config import CaseConfig
from .discretise import Layout, discretise
from .errors import (EXIT_CONVERGED, EXIT_DIVERGED, EXIT_LINEAR, EXIT_NOT_CONVERGED, BackendUnavailable,
                     CaseFileError, Issue)
from .newton import COLUMNS, Outcome, interpolate, newton

EXIT_FOR = {"converged": EXIT_CONVERGED, "not_converged": EXIT_NOT_CONVERGED, "diverged": EXIT_DIVERGED,
            "singular": EXIT_LINEAR}


@dataclass
class Result:
    problem: Problem
    outcome: Outcome
    fields: tuple[np.ndarray, np.ndarray, np.ndarray]
    metrics: dict
    wall_time: float

    @property
    def exit_code(self) -> int:
        return EXIT_FOR[self.outcome.status]


def _solve_one(cfg: CaseConfig, start, log, label, backend, watched: bool = False) -> tuple[Problem, Outcome]:
    prob = build(cfg)
    d = discretise(prob.grid, prob.bounds, prob.nu, prob.source_u, prob.source_v, prob.pin_level)
    if start is None:
        u0, v0, p0 = prob.start(prob.grid)
    else:
        u0, v0, p0 = interpolate(start[0], start[1], prob.grid)
    x0 = np.concatenate([u0.ravel(), v0.ravel(), p0.ravel()])
    lay = Layout(prob.grid.nx, prob.grid.ny)
    watch = (lambda x: metrics.monitored(prob, *lay.split(x))) if watched else None
    out = newton(d, x0, tolerance=cfg.tolerance, max_iterations=cfg.max_iterations,
                 update_tolerance=cfg.update_tolerance, chord=cfg.chord, divergence_limit=cfg.divergence_limit,
                 h_ref=prob.h_ref, log=log, label=label, backend=backend, watch=watch)
    return prob, out


def _stage(cfg: CaseConfig, out: Outcome) -> dict:
    """One entry of ``metrics.json``'s ``sequence``: a mesh (and Reynolds number) solved on the way."""
    return {"nx": cfg.nx, "ny": cfg.ny, "reynolds": cfg.reynolds, "iterations": out.iterations,
            "factorisations": out.factorisations, "linear_seconds": round(out.linear_seconds, 4),
            "status": out.status}


def solve(cfg: CaseConfig, log: Callable[[str], None] = print) -> Result:
    """Solve the case, first on coarser meshes when ``coarse_levels`` asks for it.

    Raises ``CaseFileError`` (before computing anything) when the case file names a sparse LU
    backend that cannot be used on this machine.
    """
    t0 = time.perf_counter()
    try:
        backend, note = linear.pick(cfg.linear_solver)
    except BackendUnavailable as exc:
        raise CaseFileError(Issue(cfg.path, "solve.linear_solver", cfg.linear_solver,
                                  f"{exc} (\"auto\" or \"superlu\" work everywhere)")) from exc
    levels = auto_levels(cfg) if cfg.coarse_levels < 0 else cfg.coarse_levels
    chain = [cfg]
    for _ in range(levels):
        c = coarser(chain[-1])
        if c is None:
            break
        chain.append(c)
    chain.reverse()
    start = None
    sequence = []
    for k, c in enumerate(chain):
        last = k == len(chain) - 1
        label = "" if len(chain) == 1 else f"[{c.nx}x{c.ny}] "
        if not last:
            # a starting field needs no more than a few orders of convergence: its own
            # discretisation error on the finer mesh is far larger
            c = dataclasses.replace(c, tolerance=max(cfg.tolerance, 1e-5), update_tolerance=0.0)
        if k == 0:
            for re_k in cfg.ramp:  # continuation in Reynolds number on the coarsest mesh
                ck = dataclasses.replace(c, reynolds=re_k, tolerance=max(cfg.tolerance, 1e-5), update_tolerance=0.0)
                pk, ok = _solve_one(ck, start, log, f"[{c.nx}x{c.ny} Re {re_k:g}] ", backend)
                sequence.append(_stage(ck, ok))
                if ok.status in ("converged", "not_converged"):
                    start = (pk.grid, Layout(pk.grid.nx, pk.grid.ny).split(ok.x))
        prob, out = _solve_one(c, start, log, label, backend, watched=last)
        sequence.append(_stage(c, out))
        if out.status in ("diverged", "singular") and not last:
            log(f"{label}coarse start failed ({out.message}); starting the next mesh from the default field")
            start = None
            continue
        start = (prob.grid, Layout(prob.grid.nx, prob.grid.ny).split(out.x))
    u, v, p = Layout(prob.grid.nx, prob.grid.ny).split(out.x)
    wall = time.perf_counter() - t0
    hist = out.history
    first, final = hist[0], hist[-1]
    names = COLUMNS[1:4]
    info = {
        "solver": {"name": "studyflow-fv", "version": __version__,
                   "scheme": "MAC grid, second-order central convection and diffusion, Newton on (u, v, p)",
                   "linear_solver": backend.NAME, **({"linear_solver_note": note} if note else {})},
        "case": {"kind": cfg.kind, "reynolds": cfg.reynolds, "nx": cfg.nx, "ny": cfg.ny, "file": cfg.path},
        "cells": prob.grid.cells,
        "status": out.status,
        "converged": out.status == "converged",
        "message": out.message,
        "iterations": out.iterations,
        "factorisations": sum(s["factorisations"] for s in sequence),
        "wall_time_s": wall,
        "linear_seconds": sum(s["linear_seconds"] for s in sequence),
        "residuals": {"initial": dict(zip(names, first[1:4])), "final": dict(zip(names, final[1:4])),
                      "tolerance": cfg.tolerance},
        "sequence": sequence,
    }
    if out.status in ("converged", "not_converged"):
        info.update(metrics.KIND[cfg.kind](prob, u, v, p))
    return Result(prob, out, (u, v, p), info, wall)


def write(result: Result, folder: Path) -> list[Path]:
    """Write history, monitors, metrics and (when there is a usable field) the fields file."""
    cfg = result.problem.config
    written = []
    h = folder / cfg.history
    output.write_history(h, result.outcome.history)
    written.append(h)
    mon = folder / cfg.monitors
    output.write_monitors(mon, result.outcome.history, result.outcome.monitors)
    written.append(mon)
    if result.outcome.status in ("converged", "not_converged"):
        u, v, p = result.fields
        shear = metrics.wall_shear(result.problem, u, v)
        f = folder / cfg.fields
        output.write_fields(f, result.problem, u, v, p, shear)
        written.append(f)
    m = folder / cfg.metrics
    output.write_json(m, result.metrics)
    written.append(m)
    return written
