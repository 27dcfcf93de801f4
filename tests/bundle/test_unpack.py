"""Safe unpacking of reviewer bundles: every refusal names the entry and nothing is written.

The attack shapes checked here (``..`` traversal, absolute member names, links that lead out,
device files, FIFOs, hard links, writing through a link) are the classic tar extraction
hazards listed in the Python documentation of ``tarfile`` extraction filters (PEP 706);
that a checker must refuse them is common practice.
"""

from __future__ import annotations

import io
import os
import tarfile
from pathlib import Path

import pytest

from studyflow.bundle.unpack import check_members, safe_extract
from studyflow.errors import EXIT_UNSAFE, UnsafePathError


def _file(name: str, data: bytes = b"x") -> tuple[tarfile.TarInfo, bytes]:
    ti = tarfile.TarInfo(name)
    ti.size = len(data)
    return ti, data


def _special(name: str, kind: bytes, linkname: str = "") -> tuple[tarfile.TarInfo, None]:
    ti = tarfile.TarInfo(name)
    ti.type = kind
    ti.linkname = linkname
    return ti, None


def _archive(path: Path, members) -> Path:
    with tarfile.open(path, "w:gz") as tf:
        for ti, data in members:
            tf.addfile(ti, io.BytesIO(data) if data is not None else None)
    return path


def _tree(root: Path) -> list[str]:
    return sorted(str(p.relative_to(root)) for p in root.rglob("*")) if root.exists() else []


def test_crafted_archive_is_refused_and_nothing_is_written(tmp_path: Path) -> None:
    sandbox = tmp_path / "sandbox"
    sandbox.mkdir()
    outside_abs = tmp_path / "abs-victim.txt"
    archive = _archive(tmp_path / "evil.tar.gz", [
        _file("b/ok.txt", b"fine"),
        _file("b/../../escaped.txt", b"traversal"),
        _file(str(outside_abs), b"absolute"),
        _special("b/out", tarfile.SYMTYPE, "../../.."),
        _file("b/after.txt", b"fine too"),
    ])
    target = sandbox / "target"
    with pytest.raises(UnsafePathError) as info:
        safe_extract(archive, target)
    message = str(info.value)
    # every refused entry is named with its reason
    assert "'b/../../escaped.txt'" in message and "'..' component" in message
    assert repr(str(outside_abs)) in message and "absolute path" in message
    assert "'b/out'" in message and "leads outside" in message
    assert info.value.exit_code == EXIT_UNSAFE
    # nothing at all was written: not the target, not the good members, nothing outside
    assert not target.exists()
    assert _tree(sandbox) == []
    assert not outside_abs.exists()
    assert not (tmp_path / "escaped.txt").exists() and not (sandbox / "escaped.txt").exists()
    assert sorted(os.listdir(tmp_path)) == ["evil.tar.gz", "sandbox"]


@pytest.mark.parametrize("member, reason", [
    (_special("dev", tarfile.CHRTYPE), "device file"),
    (_special("blk", tarfile.BLKTYPE), "device file"),
    (_special("pipe", tarfile.FIFOTYPE), "FIFO"),
    (_special("hard", tarfile.LNKTYPE, "a.txt"), "hard link"),
    (_special("abs-link", tarfile.SYMTYPE, "/etc/passwd"), "absolute path"),
    (_special("d/up", tarfile.SYMTYPE, "../.."), "leads outside"),
])
def test_each_unsafe_kind_is_refused_by_name(tmp_path: Path, member, reason: str) -> None:
    archive = _archive(tmp_path / "a.tar", [_file("a.txt"), member])
    with pytest.raises(UnsafePathError) as info:
        safe_extract(archive, tmp_path / "t")
    assert repr(member[0].name) in str(info.value) and reason in str(info.value)
    assert not (tmp_path / "t").exists()


def test_writing_through_a_link_is_refused_even_when_the_link_stays_inside(tmp_path: Path) -> None:
    # a link that is harmless by itself can redirect a later (or earlier) member
    archive = _archive(tmp_path / "a.tar", [_file("x/f.txt"), _special("y", tarfile.SYMTYPE, "x"),
                                            _file("y/g.txt")])
    with pytest.raises(UnsafePathError, match="'y/g.txt'.*through the symbolic link 'y'"):
        safe_extract(archive, tmp_path / "t")


def test_duplicate_member_is_refused() -> None:
    refusals = check_members([_file("a.txt")[0], _special("a.txt", tarfile.SYMTYPE, "b")[0]])
    assert [r.entry for r in refusals] == ["a.txt"] and "duplicate" in refusals[0].reason


def test_safe_archive_unpacks_with_inside_links(tmp_path: Path) -> None:
    archive = _archive(tmp_path / "a.tar.gz", [_file("top/a.txt", b"hello"),
                                               _special("top/sub/link", tarfile.SYMTYPE, "../a.txt")])
    names = safe_extract(archive, tmp_path / "t")
    assert names == ["top/a.txt", "top/sub/link"]
    assert (tmp_path / "t/top/sub/link").read_bytes() == b"hello"


def test_target_must_be_new_or_empty(tmp_path: Path) -> None:
    # an existing tree could already hold a link that leads out; only a fresh folder is safe
    archive = _archive(tmp_path / "a.tar", [_file("a.txt")])
    (tmp_path / "t").mkdir()
    (tmp_path / "t" / "old").symlink_to("/")
    from studyflow.errors import AuditError
    with pytest.raises(AuditError, match="not empty"):
        safe_extract(archive, tmp_path / "t")


def test_audit_command_refuses_crafted_archive_with_exit_code(tmp_path: Path, capsys) -> None:
    import argparse
    import json

    from studyflow.cli.bundle import register

    archive = _archive(tmp_path / "evil.tar.gz", [_file("b/MANIFEST.json", b"{}"),
                                                  _file("b/../../../escaped.txt", b"x")])
    parser = argparse.ArgumentParser()
    register(parser.add_subparsers())
    args = parser.parse_args(["audit", str(archive), "--into", str(tmp_path / "t"), "--json"])
    assert args.handler(args) == EXIT_UNSAFE
    out = json.loads(capsys.readouterr().out)
    assert out["verdict"] == "refused" and "'b/../../../escaped.txt'" in out["error"]
    assert sorted(os.listdir(tmp_path)) == ["evil.tar.gz"]


def test_not_a_bundle_and_damaged_archive_are_clear_errors(tmp_path: Path) -> None:
    from studyflow.bundle import audit
    from studyflow.errors import EXIT_AUDIT_FAILED, AuditError

    plain = _archive(tmp_path / "plain.tar.gz", [_file("x/readme.txt", b"hello")])
    with pytest.raises(AuditError, match="no MANIFEST.json") as info:
        audit(plain, into=tmp_path / "t1")
    assert info.value.exit_code == EXIT_AUDIT_FAILED
    damaged = tmp_path / "damaged.tar.gz"
    damaged.write_bytes(plain.read_bytes()[:40])
    with pytest.raises(AuditError, match="damaged.tar.gz"):
        audit(damaged, into=tmp_path / "t2")
    assert not (tmp_path / "t2").exists()


def test_archive_larger_than_the_free_space_is_refused_before_writing(tmp_path: Path, monkeypatch, capsys) -> None:
    # a decompression bomb is the extreme case: declared sizes are summed and set against the
    # free space of the file system that would receive them (common practice for safe extraction)
    import errno
    from collections import namedtuple

    from studyflow.bundle import unpack
    from studyflow.cli import main
    from studyflow.errors import EXIT_SYSTEM

    archive = _archive(tmp_path / "big.tar.gz", [_file("b/MANIFEST.json", b"{}"), _file("b/zeros.bin", bytes(5000))])
    usage = namedtuple("usage", "total used free")
    monkeypatch.setattr(unpack.shutil, "disk_usage", lambda p: usage(10_000, 9_000, 1_000))
    with pytest.raises(OSError) as err:
        safe_extract(archive, tmp_path / "t" / "deeper")
    assert err.value.errno == errno.ENOSPC
    assert "5,002 bytes" in err.value.strerror and "1,000 are free" in err.value.strerror
    assert str(archive) in err.value.strerror and err.value.filename == str(tmp_path / "t" / "deeper")
    assert not (tmp_path / "t").exists()
    assert main(["audit", str(archive), "--into", str(tmp_path / "review")]) == EXIT_SYSTEM
    assert "nothing was written" in capsys.readouterr().err and not (tmp_path / "review").exists()
    monkeypatch.undo()
    assert safe_extract(archive, tmp_path / "t") == ["b/MANIFEST.json", "b/zeros.bin"]
