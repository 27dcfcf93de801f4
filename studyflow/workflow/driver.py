"""Drive Snakemake for one run of a study.

Snakemake runs as a child process through its command line, not through its Python API:
* process isolation: the engine's threads, logging set-up and ``sys.exit`` calls stay out of the
  caller (a notebook, the CLI), and a crash of the engine cannot take studyflow down with it;
* clean interruption: the child leads its own process group, so one SIGINT to that group
  reaches Snakemake, every step runner and every solver together, and a SIGKILL of the group
  after a grace period leaves nothing running (SIGTERM can hang Snakemake at large job counts);
* a stable interface: the command-line options change far less between Snakemake releases than
  its Python API did between 7, 8 and 9.

The child is ``enginelaunch.py``, which calls Snakemake's own command-line entry point after
trimming its start-up (executor plugins a local run cannot use, one module scan, timers that
do not hold the exit); ``EngineStart`` starts it while the plan is still being made. A local run
of many cases hands it batches of cases (``batches.py``, ``runbatch.py``) instead of one job per
step.

Options chosen for large studies (measured on a 2-core machine, see issue 2 and
benchmarks/bench_dispatch.py): ``--scheduler greedy --scheduler-subsample 100`` and a high
``--max-jobs-per-timespan`` keep scheduling linear in the number of jobs; explicit targets (only
the cases the plan says must run) avoid an aggregating rule with N inputs, which is quadratic;
``--nolock`` because studyflow's own run lock replaces Snakemake's (which survives a SIGKILL and
then needs ``--unlock``); ``--rerun-triggers input --drop-metadata`` so that Snakemake runs
exactly the steps whose done marker is missing: the plan removed the markers of stale steps.
"""

from __future__ import annotations

import json
import os
import signal
import sys
import time
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Callable, Sequence

from ..errors import WorkflowError
from ..spec.model import Study
from . import batches as local_batches
from . import signature as sig
from .enginelaunch import TARGETS_ON_STDIN, wants_plugins
from .rules_support import done_path, ensure_importable, group_components, rule_spec

RULES = Path(__file__).resolve().parent / "rules" / "studyflow.smk"
# Snakemake's command line behind a filter that skips executor plugins a local run cannot use
# (their import can cost seconds); see enginelaunch.py.
LAUNCHER = Path(__file__).resolve().with_name("enginelaunch.py")
RUN_LOG = "run.log"
RUN_INFO = "run.json"
RULES_INFO = "rules.json"


@dataclass
class EngineOptions:
    cores: int | None = None
    keep_going: bool = True
    retries: int | None = None
    extra_args: Sequence[str] = ()
    progress: bool = True
    grace_s: float = 10.0
    poll_s: float = 1.0
    max_jobs_per_second: int = 100_000
    config: Sequence[str] = ()  # extra KEY=VALUE entries for --config (cluster: step_runner=...)
    # Local runs: "auto", "off" or cases per Snakemake job (batches.py); cluster runs use "off"
    # (their own batching is the scheduler job group).
    batch: str | int = "auto"
    # Estimated cost of each case (its cells), to spread the expensive ones over the batches.
    costs: dict[str, float] | None = None
    # Called as after_engine(study, cases, log_path, started_at) once the engine stopped, before
    # the cases' states are read (cluster runs attach the scheduler's reasons here).
    after_engine: Callable[[Study, Sequence[str], Path, float], object] | None = None


@dataclass
class EngineResult:
    returncode: int
    interrupted: bool
    elapsed_s: float
    log: Path
    targets: int
    done: int = 0
    failed: int = 0
    batches: int = 0  # Snakemake jobs that each ran many cases (0: one job per step)


def default_cores() -> int:
    return max(1, len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else (os.cpu_count() or 1))


def snakemake_argv(study: Study, targets: Sequence[str], opts: EngineOptions) -> list[str]:
    cores = opts.cores or default_cores()
    config = [f"study={study.file}", "driver=1", f"rules={study.state_dir / RULES_INFO}"]
    if opts.retries is not None:
        config.append(f"retries={int(opts.retries)}")
    config += list(opts.config)
    argv = [sys.executable, str(LAUNCHER), *targets,
            "--config", *config,
            "--snakefile", str(RULES), "--directory", str(study.root),
            "--cores", str(cores),
            "--nolock", "--rerun-incomplete",
            "--rerun-triggers", "input", "--drop-metadata",
            "--scheduler", "greedy", "--scheduler-subsample", "100",
            "--max-jobs-per-timespan", f"{opts.max_jobs_per_second}/1s",
            "--latency-wait", "5",
            "--quiet", "progress", "host",
            *group_components(study)]
    if opts.keep_going:
        argv.append("--keep-going")
    argv += list(opts.extra_args)
    return argv


class Progress:
    """Counts finished and failed cases among the targets from their files, cheaply enough to
    poll every second at 10,000 cases (only cases still pending are looked at)."""

    def __init__(self, study: Study, cases: Sequence[str]):
        self.last = study.steps[-1].name
        self.steps = study.step_names()
        self.cases_dir = study.cases_dir
        self.pending = set(cases)
        self.total = len(cases)
        self.done = 0
        self.failed: dict[str, str] = {}
        self._seen: dict[str, tuple[int, dict]] = {}

    def _status(self, path: str) -> dict:
        try:
            mtime = os.stat(path).st_mtime_ns
        except OSError:
            return {}
        cached = self._seen.get(path)
        if cached is None or cached[0] != mtime:
            cached = self._seen[path] = (mtime, sig.read_json(path) or {})
        return cached[1]

    def _done(self, case_dir: str, step: str) -> bool:
        # A marker beside a failed status is a cluster batch's failure marker (see state.py).
        return (os.path.exists(sig.marker_path(case_dir, step))
                and self._status(sig.status_path(case_dir, step)).get("state") != "failed")

    def poll(self) -> None:
        finished = []
        for case in self.pending:
            d = str(self.cases_dir / case)
            if self._done(d, self.last):
                finished.append(case)
                self.done += 1
                self.failed.pop(case, None)
                continue
            for step in self.steps:
                if self._done(d, step):
                    continue
                st = self._status(sig.status_path(d, step))
                if st.get("state") == "failed":
                    self.failed[case] = f"{step}: {st.get('reason')}"
                else:
                    self.failed.pop(case, None)  # not run yet, or a retry is under way
                break
        self.pending.difference_update(finished)

    def line(self, elapsed: float) -> str:
        finished = self.done + len(self.failed)
        left = ""
        if 0 < finished < self.total and elapsed > 0:
            left = f", ~{_hms(elapsed / finished * (self.total - finished))} left"
        return (f"studyflow: {self.done}/{self.total} cases done, {len(self.failed)} failed, "
                f"{_hms(elapsed)} elapsed{left}")


def _hms(seconds: float) -> str:
    s = int(round(seconds))
    return f"{s // 3600}:{s % 3600 // 60:02d}:{s % 60:02d}"


def _killpg(pgid: int, signo: int) -> None:
    try:
        os.killpg(pgid, signo)
    except (ProcessLookupError, PermissionError):
        pass


class EngineStart:
    """Snakemake started while the study is still being rendered and planned.

    Snakemake spends ~1.4 s importing itself and collecting its plugins before it reads a
    single option that depends on the plan (the targets). Started first, it does that on a
    second core while this process renders and plans (at 10,000 cases, ~2.5 s), then receives
    its targets on stdin (``enginelaunch.py --targets-on-stdin``). When the plan finds nothing
    to run, the waiting process is killed; on a one-core machine nothing is started early.
    """

    def __init__(self, study: Study, opts: EngineOptions, inherit_fds: Sequence[int] = ()):
        import subprocess

        self.proc: Any = None
        self.log_path = study.state_dir / RUN_LOG
        # Its output goes to a file of its own until it gets targets: a run that stops before
        # (a template error, nothing to run) leaves the last run's log as it was.
        self.early_log = study.state_dir / (RUN_LOG + ".next")
        if default_cores() < 2:
            return
        ensure_importable()
        study.state_dir.mkdir(parents=True, exist_ok=True)
        argv = [sys.executable, str(LAUNCHER), TARGETS_ON_STDIN, *snakemake_argv(study, [], opts)[2:]]
        try:
            self.proc = _popen_engine(argv, study, self.early_log, inherit_fds, subprocess.PIPE)
        except OSError:
            self._drop_log()  # run_engine starts it the usual way and reports why it cannot

    def _drop_log(self) -> None:
        try:
            self.early_log.unlink()
        except FileNotFoundError:
            pass

    def go(self, targets: Sequence[str]) -> Any:
        """The started engine, given ``targets``; None when it is gone (then start a new one)."""
        proc, self.proc = self.proc, None
        if proc is None:
            return None
        try:
            if proc.poll() is not None:
                raise OSError("the engine stopped early")
            # The engine keeps writing to the same open file under its new name.
            os.replace(self.early_log, self.log_path)
            proc.stdin.write(json.dumps(list(targets)).encode())
            proc.stdin.close()
        except OSError:
            _discard(proc)
            self._drop_log()
            return None
        return proc

    def discard(self) -> None:
        proc, self.proc = self.proc, None
        if proc is not None:
            _discard(proc)
            self._drop_log()


def _popen_engine(argv: list[str], study: Study, log_path: Path, inherit_fds: Sequence[int], stdin: Any) -> Any:
    """The engine as the leader of its own process group (so one signal reaches all it started),
    output to ``log_path``, holding ``inherit_fds`` (the run lock)."""
    import subprocess

    with open(log_path, "wb") as log:
        return subprocess.Popen(argv, cwd=str(study.root), stdout=log, stderr=subprocess.STDOUT, stdin=stdin,
                                start_new_session=True, pass_fds=tuple(inherit_fds))


def _discard(proc: Any) -> None:
    try:
        proc.stdin.close()
    except OSError:
        pass
    _killpg(proc.pid, signal.SIGKILL)
    proc.wait()


def run_engine(study: Study, cases: Sequence[str], opts: EngineOptions,
               report: Callable[[str, bool], None] | None = None,
               inherit_fds: Sequence[int] = (), start: EngineStart | None = None) -> EngineResult:
    """Run the last step of each of ``cases`` (and whatever it needs) through Snakemake.

    SIGINT (Ctrl-C) or SIGTERM to studyflow is forwarded as SIGINT to the engine's process
    group; what is still running ``grace_s`` later is killed with SIGKILL. Finished cases keep
    their done markers; interrupted steps have none and run again next time. ``inherit_fds``
    (the run lock's descriptor) are passed to the engine, so the study stays locked while
    Snakemake runs even if this process is killed. ``start``: an engine already started (it
    gets the targets; when it is gone, a new one is started).
    """
    import subprocess

    ensure_importable()
    last = study.steps[-1].name
    state = study.state_dir
    state.mkdir(parents=True, exist_ok=True)
    cores = opts.cores or default_cores()
    setting = local_batches.parse_setting(opts.batch)
    if wants_plugins(list(opts.extra_args)):  # another executor: no local batches
        setting = "off"
    n_batches = local_batches.batch_count(len(cases), cores, setting)
    if n_batches:
        groups = local_batches.deal(cases, n_batches, opts.costs)
        retries = study.retries if opts.retries is None else int(opts.retries)
        targets = local_batches.write(state, study.cases_dir, groups, study.step_names(), retries,
                                      opts.keep_going)
    else:
        local_batches.clear(state)
        targets = [done_path("", c, last) for c in cases]
    n_jobs_batched = len(targets) if n_batches else 0
    log_path = state / RUN_LOG
    sig.write_json_atomic(str(state / RULES_INFO), rule_spec(study))
    argv = snakemake_argv(study, targets, opts)
    started = time.time()
    progress = Progress(study, cases)
    say = report or _stderr_reporter()
    interrupted: list[float] = []

    proc = start.go(targets) if start is not None else None
    if proc is None:
        try:
            proc = _popen_engine(argv, study, log_path, inherit_fds, subprocess.DEVNULL)
        except OSError as exc:
            raise WorkflowError(f"cannot start Snakemake ({argv[0]} {argv[1]}): {exc}") from None
    pgid = proc.pid
    sig.write_json_atomic(str(state / RUN_INFO), {
        "started_at": started, "pid": os.getpid(), "cores": cores, "cases": len(cases), "batches": n_jobs_batched,
        "engine_pgid": pgid,  # lets `status` (and tests) find the engine's process group
        "ended_at": None, "returncode": None, "interrupted": False})

    def on_signal(signum, frame):  # noqa: ARG001
        if not interrupted:
            interrupted.append(time.time())
            _killpg(pgid, signal.SIGINT)

    previous = {}
    for s in (signal.SIGINT, signal.SIGTERM):
        try:
            previous[s] = signal.signal(s, on_signal)
        except ValueError:  # not the main thread: the caller handles signals
            pass
    try:
        last_line = 0.0
        while True:
            try:
                proc.wait(timeout=opts.poll_s)
                break
            except subprocess.TimeoutExpired:
                pass
            if interrupted and time.time() - interrupted[0] > opts.grace_s:
                _killpg(pgid, signal.SIGKILL)
            if opts.progress:
                now = time.time()
                progress.poll()
                if sys.stderr.isatty() or now - last_line >= 10.0:
                    say(progress.line(now - started), False)
                    last_line = now
    finally:
        for s, h in previous.items():
            signal.signal(s, h)
        # Nothing of this run may outlive it (orphaned step runners or solvers).
        _killpg(pgid, signal.SIGKILL)
    if opts.after_engine is not None:
        opts.after_engine(study, cases, log_path, started)
    elapsed = time.time() - started
    progress.poll()
    if opts.progress:
        say(progress.line(elapsed), True)
    info = sig.read_json(str(state / RUN_INFO)) or {}
    info.update(ended_at=time.time(), returncode=proc.returncode, interrupted=bool(interrupted))
    sig.write_json_atomic(str(state / RUN_INFO), info)
    if n_batches:
        local_batches.clear(state)
    return EngineResult(proc.returncode, bool(interrupted), elapsed, log_path, len(cases),
                        progress.done, len(progress.failed), n_jobs_batched)


def _stderr_reporter() -> Callable[[str, bool], None]:
    tty = sys.stderr.isatty()

    def say(text: str, final: bool) -> None:
        if tty:
            sys.stderr.write("\r" + text + ("\n" if final else "\x1b[K"))
        else:
            sys.stderr.write(text + "\n")
        sys.stderr.flush()

    return say


def log_tail(path: Path, lines: int = 30) -> str:
    try:
        text = path.read_text(encoding="utf-8", errors="replace")
    except OSError:
        return ""
    return "\n".join(text.splitlines()[-lines:])
