"""Start Snakemake's command line with only the executor plugins a run can use.

    python enginelaunch.py SNAKEMAKE-ARGS...     (run by path by the driver, like runstep.py)

Snakemake finds its executor plugins by importing every installed module named
``snakemake_executor_plugin_*`` on every start, whatever executor the run uses. Some do real
work at import: measured here, the SLURM plugin imports pandas (~0.6 s) and asks the scheduler
for its settings with ``scontrol``, which waits up to 10 s when no controller answers (a laptop
with the SLURM client installed but no cluster: 10.9 s for a one-job local run instead of
1.1 s). A local run (no ``--executor``, no profile) needs none of them, so this launcher hides
them from the module scan; a run that names an executor or a profile sees every plugin.

The scan goes through ``pkgutil.iter_modules``; if a Snakemake release finds plugins another
way, the filter simply has no effect and nothing else changes. ``STUDYFLOW_ALL_PLUGINS=1`` in
the environment turns the filter off.
"""

from __future__ import annotations

import os
import pkgutil
import sys

PREFIX = "snakemake_executor_plugin_"
# Options after which Snakemake may load an executor plugin by name.
NEEDS_PLUGINS = ("--executor", "-e", "--profile", "--workflow-profile")


def wants_plugins(argv: list[str]) -> bool:
    """True when the command line (or the environment) may select a non-local executor."""
    if os.environ.get("STUDYFLOW_ALL_PLUGINS") == "1" or os.environ.get("SNAKEMAKE_PROFILE"):
        return True
    for arg in argv:
        name = arg.split("=", 1)[0]
        if name in NEEDS_PLUGINS:
            return True
    return False


def hide_executor_plugins() -> None:
    original = pkgutil.iter_modules

    def iter_modules(path=None, prefix=""):
        for info in original(path, prefix):
            if not info.name.startswith(PREFIX):
                yield info

    pkgutil.iter_modules = iter_modules


def main(argv: list[str]) -> None:
    if not wants_plugins(argv):
        hide_executor_plugins()
    from snakemake.cli import main as snakemake_main

    sys.argv = ["snakemake", *argv]
    snakemake_main()


if __name__ == "__main__":
    main(sys.argv[1:])
