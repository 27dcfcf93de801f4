"""The study's run lock: one run at a time per study, released by the kernel when its holder dies.

Snakemake runs with ``--nolock`` (its own lock survives a SIGKILL and then needs ``--unlock``);
this ``fcntl.flock`` on ``<study>/.studyflow/run.lock`` replaces it. A flock belongs to the open
file, so it vanishes with the last process holding the file open: no stale lock after a crash.
The Snakemake child inherits the descriptor, so the study stays locked while it runs even if the
driver itself is killed.
"""

from __future__ import annotations

import fcntl
import json
import os
import socket
from datetime import datetime, timezone
from pathlib import Path
from typing import Any

from ..errors import StudyBusyError

LOCK_NAME = "run.lock"


class RunLock:
    def __init__(self, state_dir: Path):
        self.path = Path(state_dir) / LOCK_NAME
        self.fd: int | None = None

    def acquire(self) -> "RunLock":
        self.path.parent.mkdir(parents=True, exist_ok=True)
        fd = os.open(self.path, os.O_RDWR | os.O_CREAT, 0o644)
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            holder = _read(fd)
            os.close(fd)
            who = (f"pid {holder.get('pid', '?')} on {holder.get('host', '?')}, started {holder.get('started', '?')}"
                   if holder else "another process")
            if holder and holder.get("host") == socket.gethostname() and not _alive(holder.get("pid")):
                # The driver was killed alone; the engine it started inherited the lock and runs on.
                who += "; that process has ended, but the workflow engine it started still runs its steps"
            raise StudyBusyError(f"{self.path.parent.parent}: a run is already going ({who}); "
                                 "wait for it to end or stop it (Ctrl-C in its terminal)") from None
        info = {"pid": os.getpid(), "host": socket.gethostname(),
                "started": datetime.now(timezone.utc).isoformat(timespec="seconds")}
        os.ftruncate(fd, 0)
        os.pwrite(fd, (json.dumps(info) + "\n").encode(), 0)
        self.fd = fd
        return self

    def release(self) -> None:
        if self.fd is not None:
            try:
                os.ftruncate(self.fd, 0)
                fcntl.flock(self.fd, fcntl.LOCK_UN)
            finally:
                os.close(self.fd)
                self.fd = None

    def __enter__(self) -> "RunLock":
        return self.acquire()

    def __exit__(self, *exc: object) -> None:
        self.release()


def _alive(pid: Any) -> bool:
    if not isinstance(pid, int) or pid <= 0:
        return True  # unknown: do not claim it ended
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        pass
    return True


def _read(fd: int) -> dict[str, Any]:
    try:
        data = os.pread(fd, 4096, 0)
        return json.loads(data) if data.strip() else {}
    except (OSError, ValueError):
        return {}


def holder(state_dir: Path) -> dict[str, Any] | None:
    """Who holds the lock now (pid, host, started), or None when no run is going."""
    path = Path(state_dir) / LOCK_NAME
    if not path.exists():
        return None
    fd = os.open(path, os.O_RDONLY)
    try:
        try:
            fcntl.flock(fd, fcntl.LOCK_SH | fcntl.LOCK_NB)
        except BlockingIOError:
            return _read(fd) or {"pid": None}
        fcntl.flock(fd, fcntl.LOCK_UN)
        return None
    finally:
        os.close(fd)
