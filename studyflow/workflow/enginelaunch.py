"""Start Snakemake's command line with only the executor plugins a run can use.

    python enginelaunch.py SNAKEMAKE-ARGS...     (run by path by the driver, like runstep.py)

Snakemake finds its executor plugins by importing every installed module named
``snakemake_executor_plugin_*`` on every start, whatever executor the run uses. Some do real
work at import: measured here, the SLURM plugin imports pandas (~0.6 s) and asks the scheduler
for its settings with ``scontrol``, which waits up to 10 s when no controller answers (a laptop
with the SLURM client installed but no cluster: 10.9 s for a one-job local run instead of
1.1 s). A local run (no ``--executor``, no profile) needs none of them, so this launcher hides
them from the module scan; a run that names an executor or a profile sees every plugin.

The scan goes through ``pkgutil.iter_modules``, once per plugin kind; the launcher answers it
from one scan. If a Snakemake release finds plugins another way, the filter and the cache simply
have no effect and nothing else changes. ``STUDYFLOW_ALL_PLUGINS=1`` in
the environment turns the filter off.
"""

from __future__ import annotations

import os
import pkgutil
import sys
import threading

PREFIX = "snakemake_executor_plugin_"
# First argument of a launcher started before its targets are known: it imports Snakemake, then
# reads the targets (a JSON list) from stdin; end of input with no data means nothing to run.
TARGETS_ON_STDIN = "--targets-on-stdin"
# Modules Snakemake imports only once it runs (found by listing sys.modules before and after);
# a launcher started early imports them while it waits. Missing ones are skipped.
WARM = ("smart_open", "snakemake.storage", "snakemake.persistence", "snakemake.dag", "snakemake.jobs")
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


def scan_once(hide_executors: bool) -> None:
    """Make ``pkgutil.iter_modules()`` list the top-level modules once per process (Snakemake's
    five plugin registries each scan the whole of sys.path: ~0.4 s at 2,000 installed modules),
    leaving out the executor plugins when ``hide_executors``."""
    original = pkgutil.iter_modules
    cache: list = []

    def keep(info) -> bool:
        return not (hide_executors and info.name.startswith(PREFIX))

    def iter_modules(path=None, prefix=""):
        if path is not None or prefix:
            return (info for info in original(path, prefix) if keep(info))
        if not cache:
            cache.extend(info for info in original() if keep(info))
        return iter(cache)

    pkgutil.iter_modules = iter_modules


class _DaemonTimer(threading.Timer):
    def __init__(self, *args, **kwargs):
        super().__init__(*args, **kwargs)
        self.daemon = True


def timers_do_not_hold_exit() -> None:
    """Snakemake's scheduler arms a ``threading.Timer`` of the rate limit's timespan (1 s at the
    least: its option has no shorter unit) on every pass, only to wake itself up again; at exit
    the interpreter waits for the last one, which costs every run up to a second (measured: a
    one-job run spent 0.09 s in Snakemake's main function and 0.9 s more before the process
    ended). Made daemons, they end with the process. A Snakemake release without such timers
    is not affected."""
    threading.Timer = _DaemonTimer  # type: ignore[misc]


def main(argv: list[str]) -> None:
    early = bool(argv) and argv[0] == TARGETS_ON_STDIN
    if early:
        argv = argv[1:]
    scan_once(hide_executors=not wants_plugins(argv))
    timers_do_not_hold_exit()
    from snakemake.cli import get_argument_parser
    from snakemake.cli import main as snakemake_main

    if early:
        get_argument_parser()  # collects the plugins while the driver still plans
        import importlib
        import json

        for name in WARM:
            try:
                importlib.import_module(name)
            except ImportError:
                pass

        data = sys.stdin.read()
        if not data.strip():
            sys.exit(0)
        argv = [str(t) for t in json.loads(data)] + argv
    sys.argv = ["snakemake", *argv]
    snakemake_main()


if __name__ == "__main__":
    main(sys.argv[1:])
