"""Helpers for the collection tests: bind a quantity from study-file style options."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import pytest

from collect_support import bind_one

from studyflow.collect import read_quantity


@pytest.fixture
def read(tmp_path: Path):
    """read(options, files={name: text or bytes}) -> QuantityResult, files written in a fresh case folder."""

    def _read(options: dict[str, Any], files: dict[str, str | bytes] | None = None, name: str = "q"):
        case = tmp_path / "case"
        case.mkdir(exist_ok=True)
        for rel, content in (files or {}).items():
            p = case / rel
            p.parent.mkdir(parents=True, exist_ok=True)
            (p.write_bytes if isinstance(content, bytes) else p.write_text)(content)
        return read_quantity(case, bind_one(options, name))

    return _read
