"""Command line of the bundled solver: ``studyflow-fv CASE.toml``.

Exit codes: 0 converged; 2 bad command line; 3 bad case file; 4 iteration limit reached (not
converged; every output still written); 5 diverged or non-finite (history and metrics kept);
6 singular Jacobian (or another failure of the sparse LU).

``studyflow-fv --linear-solvers`` lists the sparse LU backends usable on this machine.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from . import __version__
from .config import load
from .errors import CaseFileError


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(prog="studyflow-fv",
                                 description="Steady 2D incompressible laminar flow on a MAC mesh (Newton, central "
                                             "differences). Writes fields, metrics and the residual history.")
    ap.add_argument("case", nargs="?", help="case file (TOML)")
    ap.add_argument("--version", action="version", version=f"studyflow-fv {__version__}")
    ap.add_argument("--quiet", action="store_true", help="print only the final line")
    ap.add_argument("--linear-solvers", action="store_true",
                    help="list the sparse LU backends and whether each can be used here (prepares MUMPS's "
                         "shim on first use), then exit")
    args = ap.parse_args(argv)
    if args.linear_solvers:
        return _list_linear_solvers()
    if args.case is None:
        ap.error("a case file is needed (or --linear-solvers)")
    try:
        cfg = load(args.case)
    except CaseFileError as exc:
        print(f"studyflow-fv: {exc}", file=sys.stderr)
        return exc.exit_code
    from .run import solve, write  # scipy and meshio load only when there is a case to solve

    def log(line: str) -> None:
        if not args.quiet:
            print(line, flush=True)

    print(f"studyflow-fv {__version__}: {cfg.kind} case, Re = {cfg.reynolds:g}, mesh {cfg.nx} x {cfg.ny}", flush=True)
    try:
        result = solve(cfg, log)
    except CaseFileError as exc:  # a sparse LU backend named in the file is not usable here
        print(f"studyflow-fv: {exc}", file=sys.stderr)
        return exc.exit_code
    folder = Path(args.case).resolve().parent
    write(result, folder)
    o = result.outcome
    solver = result.metrics["solver"]
    tail = (f"{o.status}: {o.iterations} iterations, {result.metrics['factorisations']} LU by "
            f"{solver['linear_solver']}, {result.wall_time:.2f} s")
    if o.message:
        tail += f" ({o.message})"
    print(tail, flush=True)
    if solver.get("linear_solver_note"):
        print(f"note: {solver['linear_solver_note']}", flush=True)
    if result.exit_code:
        print(f"studyflow-fv: {o.status}: {o.message}", file=sys.stderr)
    return result.exit_code


def _list_linear_solvers() -> int:
    from . import linear

    survey = linear.survey()
    chosen, _ = linear.pick("auto")
    for name, reason in survey.items():
        state = "usable" if reason is None else f"not usable: {reason}"
        mark = "  (auto picks this)" if name == chosen.NAME else ""
        print(f"{name:8s} {state}{mark}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
