"""The input signature of a step, shared by the step runner and the plan. Standard library only.

A step's signature is the SHA-256 of its command (argv, reads, writes, upstream step name), the
SHA-256 of every file it reads, and the signature of the step before it. The runner stores it in
the done marker together with its parts, so the plan can both tell *whether* a step is stale
(signature differs) and *why* (which part differs), without asking Snakemake.

Done marker ``.studyflow/<step>.done`` (JSON)::

    {"signature": SHA, "command": SHA, "upstream": SHA or null, "params": SHA, "mesh": SHA,
     "reads": {path: {"sha": SHA, "size": BYTES, "mtime_ns": NS}}, "finished": ISO-8601 UTC}
"""

from __future__ import annotations

import os
import sys

# The step runner imports this module on every job, so it avoids ``json`` and ``hashlib``
# (together ~30 ms of start-up under load: json pulls in ``re`` and compiles patterns, hashlib
# loads OpenSSL) and uses their C cores directly, falling back to the modules where those are
# missing. The output is byte for byte what ``json.dumps`` gives (checked in the tests).
try:
    from _json import encode_basestring_ascii as _enc_str
    from _json import make_scanner as _make_scanner
except ImportError:  # pragma: no cover - not CPython
    _enc_str = _make_scanner = None
try:
    from _sha256 import sha256 as _sha256  # CPython 3.11
except ImportError:  # pragma: no cover
    try:
        from _sha2 import sha256 as _sha256  # CPython 3.12+
    except ImportError:
        from hashlib import sha256 as _sha256

STATE = ".studyflow"


def _sha_text(text: str) -> str:
    return _sha256(text.encode("utf-8")).hexdigest()


def _encode(obj: object, out: list[str], item_sep: str, key_sep: str) -> None:
    if obj is None:
        out.append("null")
    elif obj is True:
        out.append("true")
    elif obj is False:
        out.append("false")
    elif isinstance(obj, str):
        out.append(_enc_str(obj))
    elif isinstance(obj, int):
        out.append(int.__repr__(obj))
    elif isinstance(obj, float):
        if obj != obj or obj in (float("inf"), float("-inf")):
            raise ValueError(f"non-finite number {obj!r} cannot be written as JSON")
        out.append(float.__repr__(obj))
    elif isinstance(obj, dict):
        out.append("{")
        for i, key in enumerate(sorted(obj)):
            if not isinstance(key, str):
                raise TypeError(f"JSON keys must be strings, got {key!r}")
            if i:
                out.append(item_sep)
            out.append(_enc_str(key))
            out.append(key_sep)
            _encode(obj[key], out, item_sep, key_sep)
        out.append("}")
    elif isinstance(obj, (list, tuple)):
        out.append("[")
        for i, item in enumerate(obj):
            if i:
                out.append(item_sep)
            _encode(item, out, item_sep, key_sep)
        out.append("]")
    else:
        raise TypeError(f"cannot write {type(obj).__name__} as JSON")


def dumps(obj: object, item_sep: str = ",", key_sep: str = ":") -> str:
    """``json.dumps(obj, sort_keys=True, separators=(item_sep, key_sep), allow_nan=False)``."""
    json = sys.modules.get("json")
    if json is not None or _enc_str is None:
        # A process that has ``json`` already (the plan of 10,000 cases) uses its C encoder,
        # some 3x faster than the encoder below, which spares the step runner the import.
        import json

        return json.dumps(obj, sort_keys=True, separators=(item_sep, key_sep), allow_nan=False)
    out: list[str] = []
    _encode(obj, out, item_sep, key_sep)
    return "".join(out)


class _Context:
    # What the C scanner reads from a json.JSONDecoder; plain types select its fast paths.
    strict = True
    object_hook = None
    object_pairs_hook = None
    parse_float = float
    parse_int = int
    parse_constant = float
    memo: dict = {}


_scan = _make_scanner(_Context()) if _make_scanner is not None else None


def loads(text: str) -> object:
    """``json.loads`` for one JSON document (ValueError when it is not valid JSON)."""
    if _scan is None:  # pragma: no cover
        import json

        return json.loads(text)
    body = text.strip(" \t\n\r")
    try:
        obj, end = _scan(body, 0)
    except StopIteration:
        raise ValueError("not JSON") from None
    if end != len(body):
        raise ValueError("extra data after the JSON document")
    return obj


def canonical(obj: object) -> str:
    return dumps(obj)


def command_hash(step_doc: dict[str, object]) -> str:
    """Hash of what the step does; the time limit and cores are left out on purpose (changing a
    limit must not rerun finished work)."""
    return _sha_text(canonical({k: step_doc.get(k) for k in ("argv", "reads", "writes", "upstream")}))


def params_hash(case_doc: dict[str, object]) -> str:
    return _sha_text(canonical({"params": case_doc.get("params"), "constants": case_doc.get("constants")}))


def mesh_hash(case_doc: dict[str, object]) -> str:
    return _sha_text(canonical(case_doc.get("mesh")))


def signature(command: str, reads: dict[str, str], upstream: str | None) -> str:
    """SHA-256 of the command hash, each read file's hash (by path) and the upstream signature."""
    return _sha_text(canonical({"command": command, "reads": dict(sorted(reads.items())), "upstream": upstream}))


def sha_file(path: str, chunk: int = 1 << 20) -> str:
    h = _sha256()
    with open(path, "rb") as fh:
        while block := fh.read(chunk):
            h.update(block)
    return h.hexdigest()


def read_json(path: str) -> dict[str, object] | None:
    """The JSON object in ``path``, or None if it is missing or unreadable (e.g. cut short)."""
    try:
        with open(path, "rb") as fh:
            data = loads(fh.read().decode("utf-8"))
    except (OSError, ValueError):
        return None
    return data if isinstance(data, dict) else None


def write_json_atomic(path: str, obj: dict[str, object]) -> None:
    """Readers see the old file or the new one, never half (write to a temporary file, then rename).

    One line with sorted keys. No fsync: these files are cheap to lose. A marker lost or cut
    short by a machine crash reads as missing, and the step simply runs again; an fsync per file
    would cost more than the dispatch of a trivial job.
    """
    tmp = f"{path}.{os.getpid()}.tmp"
    with open(tmp, "w", encoding="utf-8") as fh:
        fh.write(dumps(obj, ", ", ": "))
        fh.write("\n")
    os.replace(tmp, path)


def marker_path(case_dir: str, step: str) -> str:
    return os.path.join(case_dir, STATE, f"{step}.done")


def status_path(case_dir: str, step: str) -> str:
    return os.path.join(case_dir, STATE, f"{step}.status.json")


def step_json_path(case_dir: str, step: str) -> str:
    return os.path.join(case_dir, STATE, f"{step}.step.json")
