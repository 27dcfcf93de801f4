"""Safe unpacking of a bundle archive.

Every member is checked before anything is written, so a refused archive leaves the target
untouched. Refused: absolute names, ``..`` components, device files, FIFOs, hard links,
symbolic links whose target leaves the target folder, members that would be written through
a link, and duplicate names (a later member would silently replace an earlier one). The
extraction itself then runs with the standard library's ``data`` filter as a second guard.

An archive whose files add up to more than the free space where it would be unpacked is refused
before anything is written (a small, highly compressed archive can hold a disk's worth of data):
the sizes are those the archive declares for each file, which are also the most extraction
writes for it.
"""

from __future__ import annotations

import errno
import os
import posixpath
import shutil
import tarfile
import zlib
from dataclasses import dataclass
from pathlib import Path, PurePosixPath

from ..errors import AuditError, UnsafePathError
from ..fsutil import confined

_HAS_FILTERS = hasattr(tarfile, "data_filter")
# what a truncated or corrupted archive raises from the tar, gzip, bz2 and lzma readers
_READ_ERRORS = (tarfile.TarError, OSError, EOFError, zlib.error)
_FILTER_ERRORS: tuple[type[BaseException], ...] = (tarfile.FilterError,) if _HAS_FILTERS else ()


@dataclass(frozen=True)
class Refusal:
    entry: str
    reason: str

    def __str__(self) -> str:
        return f"archive entry {self.entry!r}: {self.reason}"


def _clean_name(name: str) -> str:
    # "./a/b" and "a/b/" are the same member as "a/b"; anything else is kept verbatim so the
    # check sees what the archive really says.
    while name.startswith("./"):
        name = name[2:]
    return name.rstrip("/") if name not in ("", "/") else name


def _name_problem(name: str) -> str | None:
    if name in ("", "."):
        return "empty name"
    if "\x00" in name:
        return "name contains a NUL byte"
    if name.startswith("/") or PurePosixPath(name).is_absolute():
        return "absolute path"
    if "\\" in name or (len(name) > 1 and name[1] == ":"):
        return "backslash or drive letter in name (not a POSIX relative path)"
    if ".." in PurePosixPath(name).parts:
        return "'..' component"
    return None


def check_members(members: list[tarfile.TarInfo]) -> list[Refusal]:
    """Every reason to refuse these members, in archive order (empty when all are safe)."""
    refusals: list[Refusal] = []
    seen: dict[str, str] = {}
    links: set[str] = set()
    for m in members:
        name = _clean_name(m.name)
        problem = _name_problem(name)
        if problem:
            refusals.append(Refusal(m.name, problem))
            continue
        if m.ischr() or m.isblk():
            refusals.append(Refusal(m.name, "device file"))
            continue
        if m.isfifo():
            refusals.append(Refusal(m.name, "FIFO"))
            continue
        if m.islnk():
            refusals.append(Refusal(m.name, f"hard link (to {m.linkname!r}); bundles hold no hard links"))
            continue
        if not (m.isreg() or m.isdir() or m.issym()):
            refusals.append(Refusal(m.name, f"unsupported member type {m.type!r}"))
            continue
        kind = "dir" if m.isdir() else "link" if m.issym() else "file"
        if name in seen and not (kind == "dir" and seen[name] == "dir"):
            refusals.append(Refusal(m.name, "duplicate entry (would replace an earlier member)"))
            continue
        seen[name] = kind
        if m.issym():
            target = m.linkname
            if not target or target.startswith("/"):
                refusals.append(Refusal(m.name, f"symbolic link to the absolute path {target!r}"))
                continue
            resolved = posixpath.normpath(posixpath.join(posixpath.dirname(name), target))
            if resolved == ".." or resolved.startswith(("../", "/")):
                refusals.append(Refusal(m.name, f"symbolic link to {target!r} leads outside the target"))
                continue
            links.add(name)
    # a member named below a link (declared before or after it) would be written through the
    # link on extraction, wherever the link points
    for m in members:
        name = _clean_name(m.name)
        parts = PurePosixPath(name).parts
        for i in range(1, len(parts)):
            if "/".join(parts[:i]) in links:
                if not any(r.entry == m.name for r in refusals):
                    refusals.append(Refusal(m.name, f"would be written through the symbolic link {'/'.join(parts[:i])!r}"))
                break
    return refusals


def _check_room(archive: Path, members: list[tarfile.TarInfo], target: Path) -> None:
    """Refuse (as the machine's refusal, ENOSPC) an archive that would not fit where it goes."""
    need = sum(m.size for m in members if m.isreg())
    probe = target
    while not probe.exists():  # the nearest folder that exists holds the file system's figure
        probe = probe.parent
    free = shutil.disk_usage(probe).free
    if need > free:
        raise OSError(errno.ENOSPC, f"{archive}: its files need {need:,} bytes, only {free:,} are free there; "
                      "nothing was written", str(target))


def _prepare_target(target: Path) -> Path:
    if target.is_symlink():
        raise UnsafePathError(f"unpack target {str(target)!r} is a symbolic link; give a real folder")
    if target.exists():
        if not target.is_dir():
            raise AuditError(f"unpack target {str(target)!r} exists and is not a folder")
        if any(target.iterdir()):
            # an existing tree may hold links that lead out; only a fresh folder is safe
            raise AuditError(f"unpack target {str(target)!r} is not empty; give a new or empty folder")
    return target


def safe_extract(archive: str | os.PathLike, target: str | os.PathLike) -> list[str]:
    """Unpack ``archive`` (tar, optionally gzip/bz2/xz) into ``target`` after checking every member.

    Returns the member names extracted. Raises ``UnsafePathError`` naming every refused entry
    (nothing is written then, not even the target folder) and ``AuditError`` when the file is
    not a readable archive.
    """
    archive = Path(archive)
    target = Path(target)
    try:
        tf = tarfile.open(archive, "r:*")
    except _READ_ERRORS as exc:
        raise AuditError(f"{archive}: not a readable tar archive ({exc})") from exc
    with tf:
        try:
            members = tf.getmembers()
        except _READ_ERRORS as exc:
            raise AuditError(f"{archive}: the archive is damaged ({exc})") from exc
        refusals = check_members(members)
        if refusals:
            lines = "\n".join(f"  - {r}" for r in refusals)
            raise UnsafePathError(f"{archive}: refused to unpack; nothing was written:\n{lines}")
        _prepare_target(target)
        _check_room(archive, members, target)
        target.mkdir(parents=True, exist_ok=True)
        names: list[str] = []
        for m in members:
            name = _clean_name(m.name)
            if not _HAS_FILTERS:  # the data filter checks the resolved destination itself
                confined(target, name, what=f"archive entry {m.name!r}")
            try:
                if _HAS_FILTERS:
                    tf.extract(m, target, filter="data")
                else:  # Python < 3.11.4: the explicit checks above are the only guard
                    tf.extract(m, target)
            except _FILTER_ERRORS as exc:  # a second guard; the checks above should catch all
                raise UnsafePathError(f"{archive}: archive entry {m.name!r} refused: {exc}") from exc
            except (tarfile.TarError, EOFError, zlib.error) as exc:
                raise AuditError(f"{archive}: the archive is damaged at entry {m.name!r} ({exc})") from exc
            except OSError as exc:
                raise AuditError(f"{target}: cannot unpack entry {m.name!r}: {exc.strerror or exc}") from exc
            names.append(name)
    return names
