"""Verbs about running: ``plan`` (what would run and why), ``run``, ``status``."""

from __future__ import annotations

import argparse
from collections import Counter
from typing import Any

from ..errors import EXIT_OK

CAUTION = ("Verification is not validation: these results show numerical behaviour only. Results that feed a "
           "design need review by a qualified engineer; local codes and licensed practice govern.")


def register(sub: Any) -> None:
    p = sub.add_parser("plan", help="show every case and step as new, up to date or stale, and why",
                       description="Render every case in memory and compare with the case folders; "
                                   "nothing is written or run.")
    p.add_argument("study", help="study folder or study file")
    p.add_argument("--all", action="store_true", help="list every step, also those up to date")
    p.add_argument("--limit", type=int, default=40, help="list at most this many steps (default 40; 0: all)")
    p.set_defaults(handler=run_plan)

    r = sub.add_parser("run", help="run every stale case through Snakemake, then collect the results",
                       description="Render the cases (only changed files are written), run the stale ones "
                                   "through Snakemake and collect the results table. Arguments after a bare "
                                   "'--' go to Snakemake unchanged.")
    r.add_argument("study", help="study folder or study file")
    r.add_argument("-j", "--cores", type=int, help="cores to use (default: all available)")
    going = r.add_mutually_exclusive_group()
    going.add_argument("--keep-going", dest="stop_on_failure", action="store_false",
                       help="run every other case when one fails (the default)")
    going.add_argument("--stop-on-failure", dest="stop_on_failure", action="store_true",
                       help="start no new case after the first failure")
    r.set_defaults(stop_on_failure=False)
    r.add_argument("--retries", type=int, help="retries of a failed step (default: the study's retries)")
    r.add_argument("--timeout", type=float, metavar="MINUTES",
                   help="wall-time limit of every step in minutes (default: the study's)")
    r.add_argument("--dry", action="store_true", help="show the plan and stop")
    r.add_argument("--no-collect", action="store_true", help="do not collect the results after the run")
    r.add_argument("--quiet", action="store_true", help="no live progress line")
    r.add_argument("--batch", default="auto", type=_batch_arg, metavar="auto|off|N",
                   help="local runs: cases per Snakemake job; 'off' gives every step of every case a job of "
                        "its own, 'auto' (default) batches only runs of more than 8 cases per core")
    r.add_argument("--executor", choices=("local", "slurm"), default="local",
                   help="where the steps run: this machine, or SLURM with the study's cluster: settings "
                        "(docs/cluster.md)")
    r.set_defaults(handler=run_run)

    s = sub.add_parser("status", help="counts, failures with reasons, time per case and time left",
                       description="Read the case folders' status files; works during a run and after it.")
    s.add_argument("study", help="study folder or study file")
    s.add_argument("--limit", type=int, default=20, help="list at most this many failures (default 20)")
    s.set_defaults(handler=run_status)


def _batch_arg(text: str) -> str | int:
    from ..errors import WorkflowError
    from ..workflow.batches import parse_setting

    try:
        return parse_setting(text, "--batch")
    except WorkflowError as exc:
        raise argparse.ArgumentTypeError(str(exc)) from None


def _hms(seconds: float | None) -> str:
    if seconds is None:
        return "unknown"
    s = int(round(seconds))
    return f"{s // 3600}:{s % 3600 // 60:02d}:{s % 60:02d}"


def print_plan(plan: Any, show_all: bool = False, limit: int = 40) -> None:
    counts = plan.counts()
    cases = plan.cases_to_run()
    total_cases = len({s.case for s in plan.steps})
    print(f"{total_cases} cases, {len(plan.steps)} steps: " +
          ", ".join(f"{counts.get(k, 0)} {k}" for k in ("new", "stale", "up to date")))
    print(f"{len(cases)} case(s) to run")
    reasons = plan.reasons()
    if reasons:
        print("why:")
        for reason, n in reasons.most_common():
            print(f"  {n:6d}  {reason}")
    rows = plan.steps if show_all else plan.to_run()
    shown = rows if limit <= 0 else rows[:limit]
    if shown:
        width = max(len(s.case) for s in shown)
        for s in shown:
            print(f"  {s.case:<{width}}  {s.step:<12s} {s.state:<10s} {s.reason}")
        if len(rows) > len(shown):
            print(f"  ... {len(rows) - len(shown)} more (use --limit 0)")
    if plan.removed:
        print(f"{len(plan.removed)} case folder(s) are no longer in the study and are kept as they are: "
              + ", ".join(plan.removed[:10]) + (" ..." if len(plan.removed) > 10 else ""))


def run_plan(args: argparse.Namespace) -> int:
    from .. import api

    print_plan(api.plan(args.study), args.all, args.limit)
    return EXIT_OK


def run_run(args: argparse.Namespace) -> int:
    from .. import api

    outcome = api.run(args.study, cores=args.cores, keep_going=not args.stop_on_failure, retries=args.retries,
                      timeout_s=args.timeout * 60.0 if args.timeout else None, dry=args.dry,
                      extra_args=args.passthrough, progress=not args.quiet, collect=not args.no_collect,
                      executor=args.executor, batch=args.batch)
    if outcome.dry:
        print_plan(outcome.plan)
        return EXIT_OK
    if not outcome.cases:
        print("nothing to run: every case is up to date")
    else:
        print(f"ran {len(outcome.cases)} case(s): {len(outcome.done)} done, {len(outcome.failed)} failed"
              + (", interrupted (finished cases are kept; run again to go on)" if outcome.interrupted else ""))
        for c in outcome.failed[:20]:
            print(f"  failed  {c.case}  {c.reason}  (log: cases/{c.case}/logs/)")
        if len(outcome.failed) > 20:
            print(f"  ... {len(outcome.failed) - 20} more failures (studyflow status)")
    if outcome.render and outcome.render.removed:
        print(f"{len(outcome.render.removed)} case folder(s) no longer in the study were kept: "
              + ", ".join(outcome.render.removed[:10]))
    if outcome.tables is not None:
        for case, reason in outcome.refused_outputs[:20]:
            print(f"  failed  {case}  {reason}  (output refused at collection)")
        print("results collected in results/ (results, histories, cases)")
        print(CAUTION)
    return outcome.exit_code


def run_status(args: argparse.Namespace) -> int:
    from .. import api

    st = api.status(args.study)
    counts: Counter = st.counts()
    total = len(st.cases)
    print(f"{st.study}: {total} cases: " + ", ".join(f"{counts.get(k, 0)} {k}"
                                                      for k in ("done", "failed", "running", "interrupted", "pending")))
    if st.running:
        print(f"a run is going: pid {st.running.get('pid')} on {st.running.get('host')}, "
              f"started {st.running.get('started')}")
    mean = st.mean_wall_s()
    walls = [c.wall_s for c in st.cases if c.status == "done"]
    if walls:
        print(f"time per case: mean {mean:.2f} s, max {max(walls):.2f} s")
    if st.elapsed_s() is not None:
        print(f"last run: {_hms(st.elapsed_s())} elapsed" + (f", ~{_hms(st.time_left_s())} left" if st.running else ""))
    for c in st.failures[: args.limit]:
        print(f"  failed  {c.case}  {c.reason}")
    if len(st.failures) > args.limit:
        print(f"  ... {len(st.failures) - args.limit} more failures")
    if st.removed:
        print(f"{len(st.removed)} case folder(s) no longer in the study: " + ", ".join(st.removed[:10]))
    return EXIT_OK
