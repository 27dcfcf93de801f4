"""Command-line verbs ``assess`` (a collected study) and ``assess-csv`` (a plain CSV of levels).

Exit codes: 0 assessed; 3 (EXIT_INVALID_INPUT) a file or column is missing or unreadable;
7 (EXIT_ANALYSIS) the data cannot be assessed (non-positive sizes, duplicate levels, fewer than
two levels, non-finite values). Errors are raised as studyflow errors and printed once by main().
"""

from __future__ import annotations

import argparse
import io
import sys
from pathlib import Path
from typing import Any

from ..errors import EXIT_OK, InputError, Problem


def register(subparsers: Any) -> None:
    """Add ``assess`` and ``assess-csv`` to the command line's sub-command parsers."""
    a = subparsers.add_parser(
        "assess", help="estimate discretization and iterative error of every quantity of a collected study",
        description="Read <study>/results/results (Parquet or CSV) and histories, estimate observed order, "
                    "extrapolated value, GCI or least-squares uncertainty and the iterative error of every "
                    "point and quantity, and write <study>/results/uncertainty.csv and .parquet.")
    a.add_argument("study", help="study folder or study file")
    a.add_argument("--formal-order", type=float, help="formal order of the scheme (default: analysis.formal_order "
                                                      "of the study file, else 2)")
    a.add_argument("--no-write", action="store_true", help="print only; do not write the uncertainty table")
    a.add_argument("--rows", type=int, default=60, help="rows to print per table (default 60)")
    a.set_defaults(handler=run_assess)

    c = subparsers.add_parser(
        "assess-csv", help="assess a plain CSV of mesh levels (cells or h, value[, group columns]) from any source",
        description="Each row is one mesh level: a size column (h, or cells with --dim), a value column, and "
                    "optional group columns; every combination of group values is assessed on its own.")
    c.add_argument("file", help="CSV file")
    c.add_argument("--formal-order", type=float, default=2.0, help="formal order of the scheme (default 2)")
    c.add_argument("--dim", type=int, choices=(1, 2, 3), help="dimension, to compute h = (V/N)^(1/d) from cells")
    c.add_argument("--measure", type=float, default=1.0, help="domain length/area/volume V for h from cells "
                                                               "(default 1: only ratios matter)")
    c.add_argument("--value", default="value", help="name of the value column (default: value)")
    c.add_argument("--size", choices=("h", "cells"), help="size column (default: h if present, else cells)")
    c.add_argument("--group", action="append", metavar="COLUMN",
                   help="group column (repeat; default: every column but size and value)")
    c.add_argument("--safety-factor", type=float, help="three-level safety factor Fs (default 1.25)")
    c.add_argument("--weighted", action="store_true",
                   help="four or more levels: also try weighted least-squares fits, keep the smaller scatter")
    c.add_argument("-o", "--output", help="write the uncertainty table here (.csv or .parquet)")
    c.add_argument("--rows", type=int, default=60, help="rows to print (default 60)")
    c.set_defaults(handler=run_assess_csv)


def run_assess(args: argparse.Namespace) -> int:
    from ..analysis.study import assess_study
    from ..analysis.text import iterative_text, uncertainty_text

    done = assess_study(args.study, formal_order=args.formal_order, write=not args.no_write)
    print(uncertainty_text(done.uncertainty, max_rows=args.rows))
    it = iterative_text(done.residuals, max_rows=args.rows)
    if it:
        print()
        print(it)
    for path in done.written:
        print(f"wrote {path}")
    return EXIT_OK


def run_assess_csv(args: argparse.Namespace) -> int:
    from ..analysis import Settings, assess, read_level_csv, uncertainty_text
    from ..fsutil import atomic_write_bytes

    if not args.measure > 0:
        raise InputError(Problem("command line", "--measure", args.measure, "must be positive"))
    if not args.formal_order > 0:
        raise InputError(Problem("command line", "--formal-order", args.formal_order, "must be positive"))
    rows = read_level_csv(args.file, value=args.value, size=args.size, groups=args.group)
    if args.safety_factor is not None and not args.safety_factor > 0:
        raise InputError(Problem("command line", "--safety-factor", args.safety_factor, "must be positive"))
    settings = Settings(formal_order=args.formal_order, weighted=args.weighted)
    if args.safety_factor is not None:
        settings = Settings(formal_order=args.formal_order, fs=args.safety_factor, weighted=args.weighted)
    table = assess(rows, None, args.formal_order, dim=args.dim, measure=args.measure, settings=settings,
                   source=str(args.file), strict=True)
    print(uncertainty_text(table, max_rows=args.rows))
    if args.output:
        out = Path(args.output)
        if out.suffix == ".parquet":
            buf = io.BytesIO()
            table.to_parquet(buf, index=False, engine="pyarrow")
            data = buf.getvalue()
        else:
            data = table.to_csv(index=False, float_format="%.17g", lineterminator="\n").encode("utf-8")
        atomic_write_bytes(out, data)
        print(f"wrote {out}")
    return EXIT_OK


def main(argv: list[str] | None = None) -> int:
    """Stand-alone entry for these two verbs (the package command line registers them too)."""
    from ..errors import StudyflowError

    parser = argparse.ArgumentParser(prog="studyflow")
    register(parser.add_subparsers(dest="command", required=True))
    args = parser.parse_args(argv)
    try:
        return args.handler(args)
    except StudyflowError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return exc.exit_code


if __name__ == "__main__":
    sys.exit(main())
