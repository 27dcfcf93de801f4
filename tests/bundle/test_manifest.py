"""Manifest hashes and the missing / altered / unexpected comparison.

Digests are checked against ``hashlib`` (the Python standard library's SHA-256, FIPS 180-4),
an outside reference for the hashing the manifest relies on.
"""

from __future__ import annotations

import hashlib
import json
from pathlib import Path

import pytest

from studyflow.bundle.manifest import FileEntry, Manifest, verify_tree
from studyflow.errors import AuditError


def _manifest(root: Path, files: dict[str, bytes]) -> Manifest:
    entries = []
    for rel, data in files.items():
        (root / rel).parent.mkdir(parents=True, exist_ok=True)
        (root / rel).write_bytes(data)
        entries.append(FileEntry(rel, hashlib.sha256(data).hexdigest(), len(data), "other"))
    return Manifest("s", "payload/s", "payload/s/study.yaml", None, "2026-01-01T00:00:00Z", "0", files=entries)


def test_sha256_of_known_message(tmp_path: Path) -> None:
    # FIPS 180-4 example: SHA-256("abc")
    m = _manifest(tmp_path, {"a": b"abc"})
    assert m.files[0].sha256 == "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
    assert verify_tree(tmp_path, m).ok


def test_missing_altered_unexpected_are_listed_by_name(tmp_path: Path) -> None:
    m = _manifest(tmp_path, {"keep.txt": b"1", "gone.txt": b"2", "sub/changed.csv": b"a,b\n1,2\n"})
    (tmp_path / "gone.txt").unlink()
    data = bytearray((tmp_path / "sub/changed.csv").read_bytes())
    data[-2] ^= 0x01  # one flipped bit keeps the size: only the hash can tell
    (tmp_path / "sub/changed.csv").write_bytes(bytes(data))
    (tmp_path / "extra.log").write_text("new")
    r = verify_tree(tmp_path, m)
    assert not r.ok
    assert r.missing == ["gone.txt"]
    assert [a.path for a in r.altered] == ["sub/changed.csv"]
    assert r.altered[0].expected_size == r.altered[0].actual_size
    assert r.unexpected == ["extra.log"]


def test_link_in_unpacked_folder_is_unsafe_not_followed(tmp_path: Path) -> None:
    m = _manifest(tmp_path, {"a.txt": b"1"})
    (tmp_path / "a.txt").unlink()
    (tmp_path / "a.txt").symlink_to("/etc/hostname")
    r = verify_tree(tmp_path, m)
    assert r.unsafe == ["a.txt"] and not r.ok and r.missing == []


def test_manifest_round_trip_and_bad_format(tmp_path: Path) -> None:
    m = _manifest(tmp_path, {"a": b"x"})
    (tmp_path / "MANIFEST.json").write_bytes(m.dumps())
    assert Manifest.load(tmp_path).to_json() == m.to_json()
    (tmp_path / "MANIFEST.json").write_text(json.dumps({"format": "other"}))
    with pytest.raises(AuditError, match="not a studyflow bundle manifest"):
        Manifest.load(tmp_path)


@pytest.mark.parametrize("key, value", [("study_dir", "../../etc"), ("study_file", "/etc/passwd"),
                                        ("path", "payload/../../x")])
def test_crafted_manifest_paths_are_refused(tmp_path: Path, key: str, value: str) -> None:
    from studyflow.errors import UnsafePathError

    data = json.loads(_manifest(tmp_path, {"a": b"x"}).dumps())
    if key == "path":
        data["files"][0]["path"] = value
    else:
        data[key] = value
    with pytest.raises(UnsafePathError, match=repr(value).replace("/", "/").replace(".", r"\.")):
        Manifest.from_json(data)
