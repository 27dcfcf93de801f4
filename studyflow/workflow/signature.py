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

import hashlib
import json
import os

STATE = ".studyflow"


def _sha_text(text: str) -> str:
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def canonical(obj: object) -> str:
    return json.dumps(obj, sort_keys=True, separators=(",", ":"), allow_nan=False)


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
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        while block := fh.read(chunk):
            h.update(block)
    return h.hexdigest()


def read_json(path: str) -> dict[str, object] | None:
    """The JSON object in ``path``, or None if it is missing or unreadable (e.g. cut short)."""
    try:
        with open(path, "rb") as fh:
            data = json.loads(fh.read())
    except (OSError, ValueError):
        return None
    return data if isinstance(data, dict) else None


def write_json_atomic(path: str, obj: dict[str, object]) -> None:
    """Readers see the old file or the new one, never half (write to a temporary file, then rename).

    No fsync: these files are cheap to lose. A marker lost or cut short by a machine crash reads
    as missing, and the step simply runs again; an fsync per file would cost more than the
    dispatch of a trivial job.
    """
    tmp = f"{path}.{os.getpid()}.tmp"
    with open(tmp, "w", encoding="utf-8") as fh:
        fh.write(json.dumps(obj, indent=1, sort_keys=True))
        fh.write("\n")
    os.replace(tmp, path)


def marker_path(case_dir: str, step: str) -> str:
    return os.path.join(case_dir, STATE, f"{step}.done")


def status_path(case_dir: str, step: str) -> str:
    return os.path.join(case_dir, STATE, f"{step}.status.json")


def step_json_path(case_dir: str, step: str) -> str:
    return os.path.join(case_dir, STATE, f"{step}.step.json")
