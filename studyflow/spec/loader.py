"""Load ``study.yaml`` into a ``Study``, reporting every problem of the file at once."""

from __future__ import annotations

import difflib
import os
from pathlib import Path
from typing import Any

from pydantic import ValidationError

from ..errors import Problem, StudySpecError
from .checks import KINDS, check_study
from .model import Study
from .yamlsource import YamlSource, read_yaml

STUDY_FILE = "study.yaml"


def study_file(path: str | os.PathLike) -> Path:
    """The study file for ``path``: the path itself, or ``<folder>/study.yaml``."""
    p = Path(path)
    return p / STUDY_FILE if p.is_dir() else p


def _fields(model: type, loc: tuple) -> list[str]:
    """Known keys at ``loc`` (for a 'did you mean' hint); empty when unknown."""
    from pydantic import BaseModel

    current: Any = model
    for part in loc[:-1]:
        if isinstance(part, int):
            continue
        if isinstance(current, type) and issubclass(current, BaseModel):
            field = current.model_fields.get(part)
            if field is None:
                field = next((f for f in current.model_fields.values() if f.alias == part), None)
            if field is None:
                return []
            current = _inner_model(field.annotation)
        else:
            return []
    if isinstance(current, type) and issubclass(current, BaseModel):
        return [f.alias or n for n, f in current.model_fields.items()]
    return []


def _inner_model(annotation: Any) -> Any:
    from typing import get_args

    from pydantic import BaseModel

    stack = [annotation]
    while stack:
        a = stack.pop()
        if isinstance(a, type) and issubclass(a, BaseModel):
            return a
        stack.extend(get_args(a))
    return None


def _clean_loc(loc: tuple) -> tuple:
    """Drop the tags pydantic inserts for tagged unions (``parameters[0].lhs.ranges`` -> ``parameters[0].ranges``)."""
    out: list[Any] = []
    for i, part in enumerate(loc):
        if (isinstance(part, str) and part in KINDS and len(out) == 2 and out[0] == "parameters"):
            continue
        out.append(part)
    return tuple(out)


def _message(err: dict, src: YamlSource, loc: tuple) -> tuple[Any, str]:
    kind = err["type"]
    value = err.get("input")
    if kind == "missing":
        return None, "is required"
    if kind == "extra_forbidden":
        known = _fields(Study, loc)
        hint = difflib.get_close_matches(str(loc[-1]), known, n=1)
        more = f"; did you mean {hint[0]!r}?" if hint else (f"; known keys: {', '.join(known)}" if known else "")
        return value, f"is not a known key{more}"
    if kind == "union_tag_invalid":
        return err.get("ctx", {}).get("tag"), f"kind must be one of {', '.join(KINDS)}"
    if kind == "union_tag_not_found":
        return None, f"kind is required (one of {', '.join(KINDS)})"
    if kind == "too_short":
        n = err.get("ctx", {}).get("min_length", 1)
        return value, f"must have at least {n} item{'s' if n != 1 else ''}"
    msg = err["msg"]
    if msg.startswith("Value error, "):
        msg = msg[len("Value error, "):]
    elif msg.startswith("Input should be"):
        msg = "must be" + msg[len("Input should be"):]
    return value, msg


def validate_data(src: YamlSource, study_dir: Path) -> tuple[Study | None, list[Problem]]:
    """Schema plus cross-key checks over already parsed data; returns the study (if valid) and problems."""
    problems = list(src.problems)
    if src.data is None and not problems:
        problems.append(Problem(src.file, "", None, "the study file is empty"))
    if src.data is None:
        return None, problems
    if not isinstance(src.data, dict):
        problems.append(Problem(src.file, "", src.data, "the study file must be a mapping of keys"))
        return None, problems
    study = None
    try:
        study = Study.model_validate(src.data)
    except ValidationError as exc:
        for err in exc.errors(include_url=False):
            loc = _clean_loc(tuple(err["loc"]))
            value, msg = _message(err, src, loc)
            problems.append(src.problem(loc, value, msg))
    problems += check_study(src, study_dir)
    # One problem per key and message, in file order.
    unique: dict[tuple[str, str], Problem] = {}
    for pr in problems:
        unique.setdefault((pr.key, pr.message), pr)
    return study, sorted(unique.values(), key=lambda pr: _line(pr.file))


def _line(where: str) -> int:
    tail = where.rsplit(":", 1)
    return int(tail[1]) if len(tail) == 2 and tail[1].isdigit() else 0


def load_study(path: str | os.PathLike) -> Study:
    """Read and check the study at ``path`` (a study folder or its ``study.yaml``).

    Raises ``StudySpecError`` listing every problem found, each naming ``file:line``, the key path
    (``parameters[2].ranges.Re.low``) and the bad value. Nothing is rendered or run here.
    """
    file = study_file(path)
    if not file.exists():
        raise StudySpecError(Problem(str(file), "", str(path), "no study file here"))
    src = read_yaml(file, shown=str(file))
    study, problems = validate_data(src, file.resolve().parent)
    if problems or study is None:
        n = len(problems)
        raise StudySpecError(problems, headline=f"{file}: {n} problem{'s' if n != 1 else ''} in the study file")
    study._file = file.resolve()
    return study
