"""Verb ``collect``: gather every case's quantities into the tidy tables in ``results/``."""

from __future__ import annotations

import argparse
from typing import Any

from ..errors import EXIT_OK
from .run import CAUTION


def register(sub: Any) -> None:
    p = sub.add_parser("collect", help="collect every case's quantities into results/ (CSV and Parquet)",
                       description="Read the declared quantities of every finished case (failed and pending "
                                   "cases are listed with their status) and write the tidy tables atomically.")
    p.add_argument("study", help="study folder or study file")
    p.set_defaults(handler=run_collect)


def run_collect(args: argparse.Namespace) -> int:
    from .. import api

    tables = api.collect(args.study, write=True)
    results = getattr(tables, "results", None)
    n = len(results) if results is not None else 0
    print(f"collected {n} result rows into results/ (results, histories, cases)")
    print(CAUTION)
    return EXIT_OK
