"""Command-line verb ``report``: build ``<study>/report/index.html`` with its figures and tables.

Exit codes: 0 the report was written (also for a study still running or with failed cases: the
report shows them); 3 (EXIT_INVALID_INPUT) the study folder, a table or the ``report:`` block of the
study file is invalid. Errors are raised as studyflow errors and printed once by main().
"""

from __future__ import annotations

import argparse
from pathlib import Path
from typing import Any

from ..errors import EXIT_OK


def register(subparsers: Any) -> None:
    """Add ``report`` to the command line's sub-command parsers."""
    p = subparsers.add_parser(
        "report", help="build the study's self-contained HTML report, figures (PNG, SVG) and tables (CSV, Markdown, LaTeX)",
        description="Read the study's collected tables (results/) and its case folders and write "
                    "<study>/report/index.html, which opens from the folder without a server, with every "
                    "figure as PNG and SVG in report/figures/ and every table as CSV, Markdown and LaTeX in "
                    "report/tables/. It can be rebuilt while the study runs; pending cases are shown as pending.")
    p.add_argument("study", help="study folder or study file")
    p.add_argument("-o", "--output", help="folder to write the report into (default: <study>/report)")
    p.add_argument("--no-fields", action="store_true",
                   help="skip the field pictures and the mesh family (faster; no 3D rendering)")
    p.set_defaults(handler=run_report)


def run_report(args: argparse.Namespace) -> int:
    from ..report import build_report

    study = Path(args.study)
    if study.is_file():
        study = study.parent
    done = build_report(study, out=args.output, fields=not args.no_fields)
    c = done.counts
    print(f"report: {done.index}")
    print(f"  {len(done.figures)} figures, {len(done.tables)} tables; cases: {c.get('done', 0)} done, "
          f"{c.get('failed', 0)} failed, {c.get('pending', 0)} pending")
    for notice in done.notices:
        print(f"  note: {notice}")
    return EXIT_OK
