"""The ``studyflow`` command line: a thin layer over ``studyflow.api``.

Each verb group is a module of this package with ``register(subparsers)``, which adds its
sub-commands and sets ``handler`` (a function of the parsed arguments returning an exit code).
Adding a group is one line in ``VERB_MODULES``. Every ``StudyflowError`` is caught once, here,
printed as one message, and turned into its exit code (``studyflow.errors``):

    0 ok · 1 some cases failed (recorded with reasons) · 2 bad command-line usage ·
    3 invalid study file or input · 4 template error · 5 workflow engine failure ·
    6 another run holds the study · 7 data cannot be assessed · 8 audit failed ·
    9 refused for safety · 10 the machine refused (disk full, permissions) ·
    130 interrupted (finished cases are kept)
"""

from __future__ import annotations

import argparse
import importlib
import sys

from .. import __version__
from ..errors import EXIT_INTERRUPTED, EXIT_SYSTEM, StudyflowError

# One line per verb group, in the order their verbs appear in --help.
VERB_MODULES = (
    "study",    # new, check, schema
    "run",      # plan, run, status
    "collect",  # collect
    "assess",   # assess, assess-csv
    "report",   # report
    "bundle",   # pack, audit, ...
    "cluster",  # cluster profiles
)

EPILOG = ("exit codes: 0 ok, 1 some cases failed, 2 usage, 3 invalid input, 4 template error, "
          "5 workflow engine, 6 study busy, 7 cannot assess, 8 audit failed, 9 unsafe, 10 system, 130 interrupted")


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="studyflow", epilog=EPILOG,
        description="Mesh-refinement and parameter studies for any command-line solver.")
    parser.add_argument("--version", action="version", version=f"studyflow {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name in VERB_MODULES:
        try:
            module = importlib.import_module(f"{__name__}.{name}")
        except ModuleNotFoundError as exc:
            if exc.name == f"{__name__}.{name}":
                continue  # that verb group is not part of this build
            raise
        module.register(sub)
    return parser


def main(argv: list[str] | None = None) -> int:
    args_in = sys.argv[1:] if argv is None else list(argv)
    # Everything after a bare "--" goes to Snakemake untouched (``studyflow run STUDY -- --dry-run``).
    passthrough: list[str] = []
    if "--" in args_in:
        i = args_in.index("--")
        args_in, passthrough = args_in[:i], args_in[i + 1:]
    parser = build_parser()
    args = parser.parse_args(args_in)
    args.passthrough = passthrough
    handler = getattr(args, "handler", None)
    if handler is None:
        parser.print_help(sys.stderr)
        return 2
    try:
        return int(handler(args) or 0)
    except StudyflowError as err:
        print(f"studyflow: error: {err}", file=sys.stderr)
        return err.exit_code
    except KeyboardInterrupt:
        print("studyflow: interrupted", file=sys.stderr)
        return EXIT_INTERRUPTED
    except OSError as err:
        # Disk full, permission denied, ...: tables are written atomically, so what was on disk
        # before stays intact; say which file and why instead of a traceback.
        where = f": {err.filename}" if getattr(err, "filename", None) else ""
        print(f"studyflow: error: {err.strerror or err}{where} (nothing already finished was lost)",
              file=sys.stderr)
        return EXIT_SYSTEM


if __name__ == "__main__":
    sys.exit(main())
