"""Verbs about the study file: ``new`` (scaffold from a bundled example), ``check``, ``schema``."""

from __future__ import annotations

import argparse
import json
from typing import Any

from ..errors import EXIT_OK


def register(sub: Any) -> None:
    p = sub.add_parser("new", help="start a study by copying a bundled example (study file and template)",
                       description="Copy a bundled example study and its template folder into a new folder. "
                                   "Without arguments, list the examples.")
    p.add_argument("example", nargs="?", help="name of the example (see 'studyflow new' for the list)")
    p.add_argument("dest", nargs="?", help="new study folder (default: the example's name)")
    p.set_defaults(handler=run_new)

    c = sub.add_parser("check", help="check a study file and its templates without rendering or running",
                       description="Validate the study file (every problem at once), compile every template "
                                   "and render every case in memory; nothing is written.")
    c.add_argument("study", help="study folder or study file")
    c.set_defaults(handler=run_check)

    s = sub.add_parser("schema", help="print the JSON Schema of study.yaml")
    s.set_defaults(handler=run_schema)


def run_new(args: argparse.Namespace) -> int:
    from .. import api

    if not args.example:
        examples = api.list_examples()
        if not examples:
            print("no bundled examples found")
        for name, path in examples.items():
            print(f"{name:24s} {path}")
        return EXIT_OK
    dest = api.new_study(args.example, args.dest or args.example)
    print(f"new study in {dest}; next: studyflow plan {dest}")
    return EXIT_OK


def run_check(args: argparse.Namespace) -> int:
    from .. import api
    from ..render.cases import make_renderer, render_all

    study = api.load_study(args.study)
    design = api.design(study)
    render_all(study, design, make_renderer(study))
    print(f"{study.file}: ok ({len(design.points)} points x {len(design.levels)} mesh levels = "
          f"{len(design)} cases, {len(study.steps)} steps, {len(study.quantities)} quantities)")
    return EXIT_OK


def run_schema(args: argparse.Namespace) -> int:
    from ..spec.model import Study

    print(json.dumps(Study.model_json_schema(by_alias=True), indent=2))
    return EXIT_OK
