"""Run the pending steps of a batch of cases in one Snakemake job: ``python -S runbatch.py BATCH.json``.

Snakemake spends some 30 ms of its own (single-threaded) time on every job it starts and
finishes, and each job starts a Python process: with one job per step of each case, that is the
cost of a trivial case, three times what ``xargs -P`` needs. For a local run with many cases the
driver therefore hands Snakemake one job per *batch* of cases (``studyflow run --batch``); this
runner goes through the batch's cases in order and, for each, runs every step whose done marker
is missing with the normal step runner (``runstep.run``, in this process: same status files,
signatures, time limits, logs and reasons as a job of its own).

What stays as with one job per step: the plan removed the markers of exactly the steps that must
run, so a changed post-processing step reruns alone; a failed step is recorded with its reason,
the case's later steps do not run, and the batch goes on with its next case; ``retries`` reruns a
failed step (not an interrupted one). Without ``keep_going``, the first failure writes a stop
file that every batch of the run checks before its next case, and the batch exits 1.

An interruption (SIGINT, SIGTERM or SIGHUP) stops the running step as the step runner does,
starts no further step and exits 130; a signal that arrives between two steps is noted and
acted on before the next one. When all its cases were tried the batch writes its output,
``BATCH.done`` (JSON: cases, failed, finished), so Snakemake sees the job complete.

Batch file (JSON, written by the driver)::

    {"cases": [CASE_DIR, ...], "steps": [STEP, ...], "retries": N, "keep_going": true,
     "stop_file": PATH}

Standard library only, like the step runner.
"""

from __future__ import annotations

import os
import sys

try:
    import _signal as signal
except ImportError:  # pragma: no cover - not CPython
    import signal  # type: ignore[no-redef]

try:  # run as a module of the package
    from . import runstep
    from . import signature as sig
except ImportError:  # pragma: no cover - run as a plain file
    import runstep  # type: ignore[no-redef]
    import signature as sig  # type: ignore[no-redef]

EXIT_FAILED = 1
EXIT_INTERRUPTED = runstep.EXIT_INTERRUPTED
EXIT_BAD_BATCH = 2


def done_path(batch_file: str) -> str:
    return batch_file[: -len(".json")] + ".done" if batch_file.endswith(".json") else batch_file + ".done"


def run_case(case_dir: str, steps: list[str], retries: int) -> int:
    """Run the case's steps that have no done marker, in order: 0 when all are done, 1 when one
    failed (the later ones are not run), 130 when interrupted."""
    for step in steps:
        if os.path.exists(sig.marker_path(case_dir, step)):
            continue
        rc = EXIT_FAILED
        for _ in range(retries + 1):
            if runstep.STOP_REQUESTED:
                return EXIT_INTERRUPTED
            rc = runstep.run(case_dir, step)
            if rc in (0, EXIT_INTERRUPTED):
                break
        if rc != 0:
            return EXIT_INTERRUPTED if rc == EXIT_INTERRUPTED else EXIT_FAILED
    return 0


def run(batch_file: str) -> int:
    try:
        with open(batch_file, encoding="utf-8") as fh:
            batch = sig.loads(fh.read())
        cases = [str(c) for c in batch["cases"]]
        steps = [str(s) for s in batch["steps"]]
    except (OSError, ValueError, KeyError, TypeError) as exc:
        sys.stderr.write(f"studyflow: cannot read the batch file {batch_file}: {exc}\n")
        return EXIT_BAD_BATCH
    retries = int(batch.get("retries") or 0)
    keep_going = bool(batch.get("keep_going", True))
    stop_file = batch.get("stop_file")
    for s in (signal.SIGINT, signal.SIGTERM, signal.SIGHUP):
        signal.signal(s, runstep.defer_signal)
    failed = 0
    for case_dir in cases:
        if runstep.STOP_REQUESTED:
            return EXIT_INTERRUPTED
        if stop_file and os.path.exists(stop_file):
            return EXIT_FAILED
        rc = run_case(case_dir, steps, retries)
        if rc == EXIT_INTERRUPTED:
            return EXIT_INTERRUPTED
        if rc != 0:
            failed += 1
            if not keep_going:
                if stop_file:
                    sig.write_json_atomic(stop_file, {"case": os.path.basename(case_dir)})
                return EXIT_FAILED
    sig.write_json_atomic(done_path(batch_file), {
        "cases": len(cases), "failed": failed,
        "finished": runstep.now_iso()})
    return 0


def main(argv: list[str] | None = None) -> int:
    args = sys.argv[1:] if argv is None else argv
    if len(args) != 1:
        sys.stderr.write("usage: python runbatch.py BATCH.json\n")
        return EXIT_BAD_BATCH
    return run(args[0])


if __name__ == "__main__":
    sys.exit(main())
