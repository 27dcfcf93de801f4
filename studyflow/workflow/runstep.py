"""Run one step of one case: ``python -m studyflow.workflow.runstep <case_dir> <step>``.

This is what every Snakemake rule calls. It imports only the standard library (start-up time is
paid once per job). It:

1. removes the step's old done marker and writes ``.studyflow/<step>.status.json`` as running,
   so an interrupted rerun can never look finished;
2. checks the upstream step is done and hashes the files the step reads (its input signature);
3. removes the step's declared outputs, so a stale output cannot pass for a new one;
4. runs the argv of ``.studyflow/<step>.step.json`` (no shell) in the case folder, stdout and
   stderr to ``logs/<step>.log``, under the step's wall-time limit;
5. checks every declared output exists, writes the status (ok or failed with a reason) and, on
   success only, the done marker holding the input signature (``signature.py``).

It exits 0 on success and non-zero on failure, so Snakemake records the job failed and skips
the case's later steps while the other cases go on.

Status file (JSON)::

    {"case": ID, "step": NAME, "state": "running" | "ok" | "failed", "reason": TEXT or null,
     "exit_code": N or null, "wall_s": S or null, "started": ISO, "ended": ISO or null,
     "started_at": EPOCH_S, "host": NAME, "pid": PID}

Reasons: ``exit code N``, ``killed by signal NAME``, ``timed out after S s``, ``missing output X``,
``missing input X``, ``upstream step X not done``, ``cannot start: ...``, ``interrupted``.
"""

from __future__ import annotations

import os
import sys
import time

try:  # the C core of ``signal``: the module itself imports enum, which this runner can do without
    import _signal as signal
except ImportError:  # pragma: no cover - not CPython
    import signal  # type: ignore[no-redef]

try:  # run as a module of the package
    from . import signature as sig
except ImportError:  # pragma: no cover - run as a plain file
    import signature as sig  # type: ignore[no-redef]

EXIT_FAILED = 1
EXIT_INTERRUPTED = 130
GRACE_S = 5.0
# Signals that arrived while a status or marker was being written, or that a caller running
# several steps in one process (runbatch.py) caught between steps: no new step starts after one.
STOP_REQUESTED: list[int] = []


def defer_signal(signum, frame):  # noqa: ARG001
    """Signal handler that only notes the signal in ``STOP_REQUESTED``."""
    STOP_REQUESTED.append(signum)


def now_iso() -> str:
    # time.strftime rather than datetime: one import less on every job's start-up.
    return time.strftime("%Y-%m-%dT%H:%M:%S+00:00", time.gmtime())


def _descendants(pid: int) -> list[int]:
    """Every live descendant of ``pid`` (Linux /proc); empty where /proc is unavailable."""
    children: dict[int, list[int]] = {}
    try:
        entries = os.listdir("/proc")
    except OSError:
        return []
    for entry in entries:
        if not entry.isdigit():
            continue
        try:
            with open(f"/proc/{entry}/stat", "rb") as fh:
                stat = fh.read().decode("ascii", "replace")
            ppid = int(stat.rsplit(")", 1)[1].split()[1])
        except (OSError, ValueError, IndexError):
            continue
        children.setdefault(ppid, []).append(int(entry))
    out, todo = [], [pid]
    while todo:
        for child in children.get(todo.pop(), []):
            out.append(child)
            todo.append(child)
    return out


def _kill_tree(root: int, sig_no: int) -> None:
    # The solver shares our process group (so a signal to the run's group reaches it, and a
    # SIGKILL of the whole group leaves no orphan); to stop it alone we signal its tree.
    for pid in [root, *_descendants(root)]:
        try:
            os.kill(pid, sig_no)
        except OSError:
            pass


class _Interrupted(Exception):
    pass


class _TimedOut(Exception):
    pass


def _spawn(argv: list[str], case_dir: str, log_fd: int) -> int:
    """Start ``argv`` in ``case_dir`` with stdout and stderr to ``log_fd`` and no stdin; no shell.

    ``os.posix_spawnp`` rather than ``subprocess``: the runner starts once per job, and the
    subprocess module's imports cost more than the spawn. The child stays in our process group.
    """
    if not argv:
        raise OSError(2, "empty command")
    here = os.getcwd()
    devnull = os.open(os.devnull, os.O_RDONLY)
    # posix_spawn has no cwd argument: the child inherits ours, so we step into the case folder
    # for the spawn only (run() is also called in-process, by studyflow.cluster.batchstep).
    os.chdir(case_dir)
    try:
        actions = [(os.POSIX_SPAWN_DUP2, devnull, 0), (os.POSIX_SPAWN_DUP2, log_fd, 1),
                   (os.POSIX_SPAWN_DUP2, log_fd, 2)]
        # Python ignores SIGPIPE and SIGXFSZ; the solver gets the default behaviour back.
        return os.posix_spawnp(argv[0], argv, dict(os.environ), file_actions=actions,
                               setsigdef=(signal.SIGPIPE, signal.SIGXFSZ))
    finally:
        os.chdir(here)
        os.close(devnull)


def _reap(pid: int) -> int:
    _, status = os.waitpid(pid, 0)
    return os.waitstatus_to_exitcode(status)


def _stop(pid: int, first: int) -> None:
    """Send ``first`` to the solver's tree, then SIGKILL what is left after the grace period."""
    _kill_tree(pid, first)
    signal.signal(signal.SIGALRM, _alarm)
    signal.setitimer(signal.ITIMER_REAL, GRACE_S)
    try:
        _reap(pid)
    except _TimedOut:
        _kill_tree(pid, signal.SIGKILL)
        _reap(pid)
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)


def _alarm(signum, frame):  # noqa: ARG001
    raise _TimedOut()


def _wait(pid: int, limit: float | None) -> tuple[str, int | None]:
    """Wait for the solver: ("done", exit code), ("timeout", None) or ("interrupted", None)."""
    got: list[int] = []

    def on_signal(signum, frame):  # noqa: ARG001
        got.append(signum)
        raise _Interrupted()

    for s in (signal.SIGINT, signal.SIGTERM, signal.SIGHUP):
        signal.signal(s, on_signal)
    if limit:
        signal.signal(signal.SIGALRM, _alarm)
        signal.setitimer(signal.ITIMER_REAL, float(limit))
    try:
        code = _reap(pid)
        outcome = "done"
    except _TimedOut:
        outcome, code = "timeout", None
    except _Interrupted:
        outcome, code = "interrupted", None
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
        for s in (signal.SIGINT, signal.SIGTERM, signal.SIGHUP):
            signal.signal(s, defer_signal)  # the status and marker must be written whole now
    if outcome == "timeout":
        _stop(pid, signal.SIGTERM)
    elif outcome == "interrupted":
        # A SIGINT to the group reached the solver too; a SIGTERM from Snakemake did not.
        _stop(pid, signal.SIGINT if got[0] == signal.SIGINT else signal.SIGTERM)
    return outcome, code


def run(case_dir: str, step: str) -> int:
    """Run ``step`` of the case in ``case_dir``; returns the exit code (0 ok, 1 failed, 130
    interrupted, 2 not rendered). Signal handlers are restored on return, so a caller running
    several steps in one process (``studyflow.cluster.batchstep``) keeps its own."""
    watched = (signal.SIGINT, signal.SIGTERM, signal.SIGHUP, signal.SIGALRM)
    saved = {s: signal.getsignal(s) for s in watched}
    try:
        return _run(case_dir, step)
    finally:
        for s, handler in saved.items():
            if handler is not None:
                signal.signal(s, handler)


def _run(case_dir: str, step: str) -> int:
    case_dir = os.path.abspath(case_dir)
    state_dir = os.path.join(case_dir, sig.STATE)
    status_file = sig.status_path(case_dir, step)
    marker = sig.marker_path(case_dir, step)
    started_at = time.time()
    status = {"case": os.path.basename(case_dir), "step": step, "state": "running", "reason": None,
              "exit_code": None, "wall_s": None, "started": now_iso(), "ended": None,
              "started_at": started_at, "host": os.uname().nodename, "pid": os.getpid()}

    def finish(state: str, reason: str | None, code: int | None, rc: int) -> int:
        status.update(state=state, reason=reason, exit_code=code, wall_s=round(time.time() - started_at, 3),
                      ended=now_iso())
        sig.write_json_atomic(status_file, status)
        return rc

    doc = sig.read_json(sig.step_json_path(case_dir, step))
    if doc is None:
        sys.stderr.write(f"studyflow: {sig.step_json_path(case_dir, step)} is missing or unreadable; "
                         "render the study first\n")
        return 2
    os.makedirs(state_dir, exist_ok=True)
    try:
        os.unlink(marker)
    except FileNotFoundError:
        pass
    sig.write_json_atomic(status_file, status)

    upstream_sig = None
    if doc.get("upstream"):
        up = sig.read_json(sig.marker_path(case_dir, doc["upstream"]))
        if up is None:
            return finish("failed", f"upstream step {doc['upstream']} not done", None, EXIT_FAILED)
        upstream_sig = up.get("signature")

    reads: dict[str, dict] = {}
    for rel in doc.get("reads", []):
        path = os.path.join(case_dir, rel)
        try:
            st = os.stat(path)
            reads[rel] = {"sha": sig.sha_file(path), "size": st.st_size, "mtime_ns": st.st_mtime_ns}
        except OSError:
            return finish("failed", f"missing input {rel}", None, EXIT_FAILED)

    for rel in doc.get("writes", []):
        if rel in reads:
            continue
        try:
            os.unlink(os.path.join(case_dir, rel))
        except (FileNotFoundError, IsADirectoryError):
            pass

    os.makedirs(os.path.join(case_dir, "logs"), exist_ok=True)
    limit = doc.get("time_limit_s")
    argv = [str(a) for a in doc.get("argv", [])]
    if STOP_REQUESTED:  # interrupted before the solver started
        return finish("failed", "interrupted", None, EXIT_INTERRUPTED)
    fd = os.open(os.path.join(case_dir, "logs", f"{step}.log"), os.O_WRONLY | os.O_CREAT | os.O_TRUNC, 0o644)
    try:
        pid = _spawn(argv, case_dir, fd)
    except OSError as exc:
        os.write(fd, f"studyflow: cannot start {argv[:1]}: {exc}\n".encode())
        os.close(fd)
        return finish("failed", f"cannot start: {exc.strerror or exc}", None, EXIT_FAILED)
    os.close(fd)
    outcome, code = _wait(pid, limit)
    if outcome == "timeout":
        return finish("failed", f"timed out after {limit:g} s", None, EXIT_FAILED)
    if outcome == "interrupted":
        return finish("failed", "interrupted", None, EXIT_INTERRUPTED)

    if code != 0:
        reason = f"exit code {code}"
        if code < 0:
            import signal as named

            try:
                reason = f"killed by signal {named.Signals(-code).name}"
            except ValueError:
                pass
        said = _last_words(os.path.join(case_dir, "logs", f"{step}.log"))
        return finish("failed", f"{reason}: {said}" if said else reason, code, EXIT_FAILED)
    for rel in doc.get("writes", []):
        if not os.path.exists(os.path.join(case_dir, rel)):
            return finish("failed", f"missing output {rel}", 0, EXIT_FAILED)

    case_doc = sig.read_json(os.path.join(state_dir, "case.json")) or {}
    shas = {rel: r["sha"] for rel, r in reads.items()}
    command = sig.command_hash(doc)
    done = {"signature": sig.signature(command, shas, upstream_sig), "command": command,
            "upstream": upstream_sig, "params": sig.params_hash(case_doc), "mesh": sig.mesh_hash(case_doc),
            "reads": reads, "finished": now_iso()}
    rc = finish("ok", None, 0, 0)
    sig.write_json_atomic(marker, done)
    return rc


def _last_words(log: str, tail: int = 4096, limit: int = 200) -> str:
    """The last non-empty line the program printed (a mesher's or solver's own error message),
    so the failure reason in status and the results table says why, not only the exit code."""
    try:
        with open(log, "rb") as fh:
            fh.seek(max(0, os.fstat(fh.fileno()).st_size - tail))
            lines = fh.read().decode("utf-8", "replace").splitlines()
    except OSError:
        return ""
    for line in reversed(lines):
        line = line.strip()
        if line:
            return line if len(line) <= limit else line[: limit - 3] + "..."
    return ""


def main(argv: list[str] | None = None) -> int:
    args = sys.argv[1:] if argv is None else argv
    if len(args) != 2:
        sys.stderr.write("usage: python -m studyflow.workflow.runstep CASE_DIR STEP\n")
        return 2
    return run(args[0], args[1])


if __name__ == "__main__":
    sys.exit(main())
