"""Read YAML keeping what error messages need: the line of every key and duplicated keys.

PyYAML silently keeps the last of two equal keys; a study with two quantities of the same name
would lose one without a word, so duplicates are reported as problems instead.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import re

import yaml

from ..errors import Problem


# libyaml's parser when PyYAML has it (10x faster on a 10,000-point table), else the Python one.
_BASE = getattr(yaml, "CSafeLoader", yaml.SafeLoader)


class StudyLoader(_BASE):  # type: ignore[misc,valid-type]
    """SafeLoader that reads ``1.0e4`` and ``1e-8`` as numbers (YAML 1.2), as engineers write them.

    PyYAML follows YAML 1.1, where a float exponent needs a sign, so ``1.0e4`` would be a string.
    """


StudyLoader.yaml_implicit_resolvers = {
    k: [r for r in v if r[0] != "tag:yaml.org,2002:float"]
    for k, v in _BASE.yaml_implicit_resolvers.items()
}
StudyLoader.add_implicit_resolver(
    "tag:yaml.org,2002:float",
    re.compile(r"""^(?:[-+]?[0-9][0-9_]*\.[0-9_]*(?:[eE][-+]?[0-9]+)?
                |[-+]?[0-9][0-9_]*[eE][-+]?[0-9]+
                |[-+]?\.[0-9_]+(?:[eE][-+]?[0-9]+)?
                |[-+]?\.(?:inf|Inf|INF)
                |\.(?:nan|NaN|NAN))$""", re.X),
    list("-+0123456789."),
)


def load_yaml_text(text: str) -> Any:
    """Parse YAML text with the study file's number rules."""
    return yaml.load(text, Loader=StudyLoader)

KeyPath = tuple[Any, ...]


def key_path(path: KeyPath) -> str:
    """``('parameters', 2, 'ranges', 'Re', 'low')`` -> ``parameters[2].ranges.Re.low``."""
    out = ""
    for part in path:
        if isinstance(part, int):
            out += f"[{part}]"
        else:
            out += ("." if out else "") + str(part)
    return out


@dataclass
class YamlSource:
    """A parsed YAML document with the line (1-based) of each key path."""

    file: str
    data: Any
    lines: dict[KeyPath, int] = field(default_factory=dict)
    problems: list[Problem] = field(default_factory=list)

    def where(self, path: KeyPath) -> str:
        """``file:line`` of the deepest known prefix of ``path`` (the file alone if none)."""
        for n in range(len(path), -1, -1):
            line = self.lines.get(tuple(path[:n]))
            if line is not None:
                return f"{self.file}:{line}"
        return self.file

    def problem(self, path: KeyPath, value: Any, message: str) -> Problem:
        return Problem(self.where(path), key_path(path), value, message)


# Aliases of aliases expand exponentially ("a billion laughs"); no real study has this many values.
MAX_NODES = 1_000_000


class _TooLarge(Exception):
    pass


def _walk(node: yaml.Node, path: KeyPath, src: YamlSource) -> None:
    if len(src.lines) > MAX_NODES:
        raise _TooLarge()
    src.lines.setdefault(path, node.start_mark.line + 1)
    if isinstance(node, yaml.MappingNode):
        seen: dict[Any, int] = {}
        for key_node, value_node in node.value:
            key = key_node.value if isinstance(key_node, yaml.ScalarNode) else str(key_node.value)
            line = key_node.start_mark.line + 1
            if key in seen:
                src.problems.append(Problem(f"{src.file}:{line}", key_path(path + (key,)), key,
                                            f"key given twice (first on line {seen[key]})"))
                continue
            seen[key] = line
            src.lines[path + (key,)] = line
            _walk(value_node, path + (key,), src)
    elif isinstance(node, yaml.SequenceNode):
        for i, item in enumerate(node.value):
            src.lines[path + (i,)] = item.start_mark.line + 1
            _walk(item, path + (i,), src)


def read_yaml(path: Path, shown: str | None = None) -> YamlSource:
    """Parse ``path``; a syntax error becomes a problem naming its line and column."""
    shown = shown or str(path)
    try:
        text = path.read_text(encoding="utf-8")
    except UnicodeDecodeError as exc:
        return YamlSource(shown, None, problems=[Problem(shown, "", exc.reason, "is not UTF-8 text")])
    try:
        loader = StudyLoader(text)
    except yaml.YAMLError as exc:  # the reader refuses control characters before any parsing
        return YamlSource(shown, None, problems=[Problem(shown, "", None, f"YAML error: {exc}")])
    try:
        node = loader.get_single_node()
        src = YamlSource(shown, None)
        if node is not None:
            _walk(node, (), src)
            src.data = loader.construct_document(node)
        return src
    except yaml.MarkedYAMLError as exc:
        mark = exc.problem_mark or exc.context_mark
        where = f"{shown}:{mark.line + 1}" if mark else shown
        col = f" column {mark.column + 1}" if mark else ""
        what = exc.problem or "invalid YAML"
        snippet = text.splitlines()[mark.line].strip() if mark and mark.line < len(text.splitlines()) else ""
        return YamlSource(shown, None, problems=[Problem(where, "", snippet, f"YAML syntax error{col}: {what}")])
    except yaml.YAMLError as exc:
        return YamlSource(shown, None, problems=[Problem(shown, "", None, f"YAML error: {exc}")])
    except _TooLarge:
        return YamlSource(shown, None, problems=[Problem(shown, "", MAX_NODES, "YAML error: the document expands "
                                                         "to more values than allowed (aliases of aliases?)")])
    except RecursionError:  # an alias that contains itself (&a [*a]) or absurdly deep nesting
        return YamlSource(shown, None, problems=[Problem(shown, "", None, "YAML error: the document nests too "
                                                         "deeply or an anchor refers to itself")])
    finally:
        loader.dispose()
