"""Collectors added by another package through the ``studyflow.collectors`` entry-point group.

The plugin is a real installed distribution (a ``.dist-info`` folder on ``sys.path``), found by
``importlib.metadata`` the way an installed package would be."""

from __future__ import annotations

import sys
import textwrap
from pathlib import Path

import pytest

from studyflow.collect import registry, read_quantity
from studyflow.errors import CollectError
from collect_support import bind_one

PLUGIN = '''
from pydantic import BaseModel, ConfigDict
from studyflow.collect import Reading, ReadFailure

class Options(BaseModel):
    model_config = ConfigDict(extra="forbid")
    word: str

def read(path, options, root):
    """The number following ``word`` in a text file of 'word number' pairs."""
    for line in path.read_text().splitlines():
        name, _, value = line.partition(" ")
        if name == options.word:
            return Reading.scalar(float(value), options.word)
    raise ReadFailure("word not found", options.word)
'''


@pytest.fixture
def plugin(tmp_path: Path, monkeypatch: pytest.MonkeyPatch):
    site = tmp_path / "site"
    site.mkdir()
    (site / "wordreader.py").write_text(PLUGIN)
    (site / "brokenreader.py").write_text("raise ImportError('needs a library that is not installed')\n")
    info = site / "wordreader-0.1.dist-info"
    info.mkdir()
    (info / "METADATA").write_text("Metadata-Version: 2.1\nName: wordreader\nVersion: 0.1\n")
    (info / "entry_points.txt").write_text(textwrap.dedent("""\
        [studyflow.collectors]
        words = wordreader
        broken = brokenreader
        json = wordreader
        """))
    monkeypatch.syspath_prepend(str(site))
    registry.refresh()
    yield site
    monkeypatch.undo()
    sys.modules.pop("wordreader", None)
    registry.refresh()


def test_plugin_collector_is_found_checked_and_read(plugin: Path, tmp_path: Path) -> None:
    assert "words" in registry.names()
    case = tmp_path / "case"
    case.mkdir()
    (case / "out.txt").write_text("drag 0.25\nlift 0.5\n")
    r = read_quantity(case, bind_one({"from": "words", "file": "out.txt", "word": "lift"}))
    assert r.status == "ok" and r.reading.final == 0.5
    r = read_quantity(case, bind_one({"from": "words", "file": "out.txt", "word": "side"}))
    assert r.reason == "out.txt: side: word not found"
    with pytest.raises(CollectError, match=r"quantities.q.wrd: unknown option for collector 'words'"):
        bind_one({"from": "words", "file": "out.txt", "wrd": "lift"})


def test_builtin_names_cannot_be_taken_over(plugin: Path) -> None:
    assert registry.get("json").origin == "built-in"


def test_broken_plugin_is_reported_by_entry_point(plugin: Path) -> None:
    with pytest.raises(CollectError) as err:
        bind_one({"from": "broken", "file": "x"})
    assert "entry point brokenreader: studyflow.collectors.broken: cannot be loaded: ImportError: " \
           "needs a library that is not installed" in str(err.value)
