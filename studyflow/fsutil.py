"""File-system helpers every layer may use: atomic writes, write-if-changed, confined paths, hashes."""

from __future__ import annotations

import hashlib
import os
import tempfile
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import BinaryIO

from .errors import UnsafePathError


@contextmanager
def atomic_output(path: str | os.PathLike, mode: int = 0o644) -> Iterator[BinaryIO]:
    """A binary file handle whose content replaces ``path`` only when the block ends cleanly.

    The bytes go to a temporary file in the same folder, are flushed to disk, then renamed over
    the target (rename is atomic on POSIX within one file system), so readers see the old file or
    the new one, never half of it. If the block fails (disk full, interrupt), the temporary file
    is removed and the old file is untouched.
    """
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
    try:
        with os.fdopen(fd, "wb") as fh:
            yield fh
            fh.flush()
            os.fsync(fh.fileno())
        os.chmod(tmp, mode)
        os.replace(tmp, path)
    except BaseException as exc:
        try:
            os.unlink(tmp)
        except FileNotFoundError:
            pass
        _raise_naming(exc, path)


def atomic_write_bytes(path: str | os.PathLike, data: bytes) -> None:
    """Write ``data`` to ``path`` so readers see the old file or the new one, never half of it."""
    with atomic_output(path) as fh:
        fh.write(data)


def atomic_write_many(files: dict[str | os.PathLike, bytes]) -> None:
    """Replace several files as one set: all of them are written to temporary files (flushed to
    disk) first, and renamed over their targets only when every one was written.

    A failure while writing (disk full) removes the temporary files and leaves every target as it
    was, so readers never see some files of the new set beside others of the old one.
    """
    staged: list[tuple[str, Path]] = []
    path = Path(".")
    try:
        for target, data in files.items():
            path = Path(target)
            path.parent.mkdir(parents=True, exist_ok=True)
            fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
            staged.append((tmp, path))
            with os.fdopen(fd, "wb") as fh:
                fh.write(data)
                fh.flush()
                os.fsync(fh.fileno())
        for tmp, path in staged:
            os.replace(tmp, path)
    except BaseException as exc:
        for tmp, _ in staged:
            try:
                os.unlink(tmp)
            except FileNotFoundError:
                pass
        _raise_naming(exc, path)


def _raise_naming(exc: BaseException, path: Path) -> None:
    """Re-raise ``exc``; an OSError that names no file (ENOSPC from a write) gets the target's name,
    so the one message the command line prints says which file could not be written."""
    if isinstance(exc, OSError) and exc.filename is None:
        raise OSError(exc.errno, exc.strerror or str(exc), str(path)) from exc
    raise exc


def atomic_write_text(path: str | os.PathLike, text: str) -> None:
    atomic_write_bytes(path, text.encode("utf-8"))


def write_if_changed(path: str | os.PathLike, data: bytes) -> bool:
    """Write ``data`` only when the file's bytes differ; return True when it was written.

    Keeping unchanged files untouched keeps their timestamps, so the workflow engine does not
    rerun steps whose inputs did not really change.
    """
    path = Path(path)
    try:
        if path.stat().st_size == len(data) and path.read_bytes() == data:
            return False
    except FileNotFoundError:
        pass
    atomic_write_bytes(path, data)
    return True


def confined(root: str | os.PathLike, relative: str | os.PathLike, what: str = "path") -> Path:
    """Resolve ``relative`` inside ``root`` and refuse anything that leaves it (``..``, absolute, links)."""
    root_path = Path(root).resolve()
    rel = Path(relative)
    if rel.is_absolute():
        raise UnsafePathError(f"{what} {str(relative)!r} is absolute; it must stay inside {root_path}")
    target = (root_path / rel).resolve()
    if target != root_path and root_path not in target.parents:
        raise UnsafePathError(f"{what} {str(relative)!r} leaves {root_path}")
    return target


def sha256_file(path: str | os.PathLike, chunk: int = 1 << 20) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        while block := fh.read(chunk):
            h.update(block)
    return h.hexdigest()


def sha256_bytes(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()
