"""Command-line verbs ``pack`` and ``audit`` (the reviewer bundle).

Exit codes of ``audit``: 0 every check passed; 8 (EXIT_AUDIT_FAILED) something is missing,
altered, unexpected or not reproduced; 9 (EXIT_UNSAFE) the archive was refused before
unpacking; 3 (EXIT_INVALID_INPUT) bad options or study file.
"""

from __future__ import annotations

import argparse
import json
import sys
from typing import Any

from ..errors import EXIT_OK, UnsafePathError


def register(subparsers: Any) -> None:
    """Add ``pack`` and ``audit`` to the command line's sub-command parsers."""
    p = subparsers.add_parser(
        "pack", help="pack a study into one reviewer bundle (tar.gz) with a manifest and its environment",
        description="Pack the study file, templates, case inputs, logs, histories, results, the uncertainty "
                    "table, the report and (unless --no-fields) field files into one tar.gz, with the "
                    "SHA-256 of every file and a record of the environment.")
    p.add_argument("study", help="study folder or study file")
    p.add_argument("-o", "--output", help="archive to write (default: <study>-bundle.tar.gz beside the study)")
    p.add_argument("--no-fields", action="store_true", help="leave solution field files out")
    p.add_argument("--json", action="store_true", help="print the result as JSON")
    p.set_defaults(handler=run_pack)

    a = subparsers.add_parser(
        "audit", help="check a reviewer bundle: hashes, re-render, re-run, uncertainty table, verdict",
        description="Audit a bundle archive or an unpacked bundle folder. Exit code 0 when every check "
                    "passed, 8 when anything is missing, altered or not reproduced, 9 when the archive "
                    "was refused as unsafe (nothing is unpacked then).")
    a.add_argument("source", help="bundle archive (.tar.gz) or unpacked bundle folder")
    a.add_argument("--into", help="folder to unpack an archive into (new or empty; default: a new temporary folder)")
    which = a.add_mutually_exclusive_group()
    which.add_argument("--rerun", choices=["all"], help="re-run every case")
    which.add_argument("--rerun-sample", type=int, metavar="N", help="re-run N cases drawn at random")
    which.add_argument("--rerun-case", nargs="+", metavar="ID", help="re-run these cases")
    a.add_argument("--seed", type=int, default=0, help="seed of --rerun-sample (default 0)")
    a.add_argument("--scratch", help="folder for re-rendering and re-running (default: temporary, removed after)")
    a.add_argument("--jobs", type=int, default=1, metavar="N", help="cases re-run at the same time (default 1)")
    a.add_argument("--engine", choices=["workflow", "direct"], default="workflow",
                   help="re-run through the workflow engine like 'run' (default), or 'direct': each case's "
                        "steps in turn with the same step runner, quicker for a few cases")
    a.add_argument("--keep-scratch", action="store_true", help="keep the temporary scratch folder")
    a.add_argument("--manifest-sha256", metavar="HEX",
                   help="the manifest digest 'pack' printed, received separately; a different manifest fails")
    a.add_argument("--json", action="store_true", help="print the full report as JSON")
    a.set_defaults(handler=run_audit)


def run_pack(args: argparse.Namespace) -> int:
    from ..bundle import pack  # imported when used: every other verb starts without the bundle layer
    from ..bundle.text import pack_text

    result = pack(args.study, args.output, fields=not args.no_fields)
    print(json.dumps(result.to_json(), indent=1) if args.json else pack_text(result))
    return EXIT_OK


def _choice(args: argparse.Namespace) -> Any:
    from ..bundle import RerunChoice

    if args.rerun == "all":
        return RerunChoice("all")
    if args.rerun_sample is not None:
        if args.rerun_sample < 1:
            from ..errors import InputError, Problem

            raise InputError(Problem("command line", "--rerun-sample", args.rerun_sample, "must be at least 1"))
        return RerunChoice("sample", n=args.rerun_sample, seed=args.seed)
    if args.rerun_case:
        return RerunChoice("cases", cases=tuple(args.rerun_case))
    return RerunChoice()


def run_audit(args: argparse.Namespace) -> int:
    from ..bundle import audit
    from ..bundle.text import audit_text

    try:
        report = audit(args.source, into=args.into, rerun=_choice(args), scratch=args.scratch,
                       keep_scratch=args.keep_scratch, jobs=max(1, args.jobs), engine=args.engine,
                       manifest_sha256=args.manifest_sha256)
    except UnsafePathError as exc:
        if not args.json:
            raise
        # machines get the refusal in the same shape as a verdict
        json.dump({"verdict": "refused", "exit_code": exc.exit_code, "error": str(exc)}, sys.stdout, indent=1)
        sys.stdout.write("\n")
        return exc.exit_code
    if args.json:
        json.dump(report.to_json(), sys.stdout, indent=1, default=str)
        sys.stdout.write("\n")
    else:
        print(audit_text(report))
    return report.exit_code
