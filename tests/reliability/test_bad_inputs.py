"""The bad-input corpus (``corpus/``): study files, templates, the bundled solver's case files,
collector definitions, CSVs for ``assess-csv`` and archives for ``audit``.

Each entry runs through the real command line (``studyflow run``, ``studyflow assess-csv``,
``studyflow audit``, ``studyflow-fv``) and must give: the documented exit code, one message naming
the bad file, the key (or line, or archive entry) and the bad value, no traceback, and no file
written. ``corpus/expected.yaml`` lists what each entry must give.
"""

from __future__ import annotations

import os
from pathlib import Path

import pytest
import yaml
from badinputs import CORPUS, KINDS, prepare
from relsupport import snapshot

from studyflow.errors import EXIT_TEMPLATE

EXPECTED: dict[str, dict[str, dict]] = yaml.safe_load((CORPUS / "expected.yaml").read_text())
ENTRIES = [(kind, name) for kind in KINDS for name in KINDS[kind][1]()]


def test_corpus_is_complete() -> None:
    """Every corpus file has an expectation and every expectation a file; at least 40 entries."""
    assert {(k, n) for k, names in EXPECTED.items() for n in names} == set(ENTRIES)
    assert len(ENTRIES) >= 40
    assert {k for k, _ in ENTRIES} == {"study", "template", "collect", "fv", "csv", "archive"}


# The only thing a ``studyflow run`` refused for a template error (in a file or a step command) may leave: the run lock it took
# before rendering (an empty file; the kernel lock on it went with the run). Study-file and
# collector errors are found before the lock is taken and leave not even that.
LOCK_ONLY = {".studyflow", os.path.join(".studyflow", "run.lock")}


@pytest.mark.parametrize("kind,name", ENTRIES, ids=[f"{k}/{n}" for k, n in ENTRIES])
def test_bad_input_is_refused_clearly_and_writes_nothing(kind: str, name: str, tmp_path: Path) -> None:
    want = EXPECTED[kind][name]
    entry = prepare(kind, name, tmp_path)
    absolute_target = Path("/tmp/evil.txt")  # what the archive with an absolute member aims at
    existed = absolute_target.exists()
    before = snapshot(tmp_path)
    code, msg = entry.run()
    after = snapshot(tmp_path)

    assert code == want["exit"], msg
    assert "Traceback" not in msg and msg.count("\n") < 12, msg  # one short message
    assert entry.file in msg, f"the message does not name the file {entry.file}:\n{msg}"
    assert want["key"] in msg, f"the message does not name the key {want['key']!r}:\n{msg}"
    assert want["value"] in msg, f"the message does not show the value {want['value']!r}:\n{msg}"
    if "also" in want:
        assert want["also"] in msg, msg

    # Nothing written, changed or removed anywhere under the test's folder.
    folder = entry.folder.relative_to(tmp_path)
    allowed = {str(folder / p) for p in LOCK_ONLY} if want["exit"] == EXIT_TEMPLATE else set()
    added = set(after) - set(before)
    assert added <= allowed, f"written: {sorted(added - allowed)}"
    for p in added:  # the lock file of a template error is empty
        assert after[p][2] in (None, b""), p
    assert set(before) <= set(after), f"removed: {sorted(set(before) - set(after))}"
    changed = [p for p in before if after[p] != before[p]]
    assert not changed, f"changed: {changed}"
    assert absolute_target.exists() == existed
