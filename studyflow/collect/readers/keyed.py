"""Collectors ``json``, ``yaml`` and ``toml``: a value found by a key path in a structured file.

A key path is dotted names with list indices: ``drag.cd``, ``stations[2].cf``, ``cf.values[-1]``;
``[*]`` takes every element of a list (``stations[*].cf`` is the list of every station's ``cf``);
a name holding dots or brackets is quoted: ``["re.x"].value``. A number is a scalar; a list of
numbers is a profile (stations from ``coord_key``, else their index) or, with ``series: true``, a
history (iteration numbers from ``iteration_key``, else the index).
"""

from __future__ import annotations

import json
import re
import tomllib
from functools import lru_cache
from pathlib import Path
from typing import Any, Union

import yaml
from pydantic import field_validator

from ..values import ReadFailure, Reading
from .base import ReaderOptions, to_number, to_numbers

Segment = Union[str, int, None]  # None stands for [*]

_TOKEN = re.compile(
    r"""\[\s*(?P<index>-?\d+)\s*\]"""
    r"""|\[\s*(?P<star>\*)\s*\]"""
    r"""|\[\s*(?P<q>["'])(?P<quoted>.*?)(?P=q)\s*\]"""
    r"""|(?P<name>[^.\[\]]+)"""
    r"""|(?P<dot>\.)"""
)


def parse_key(path: str) -> tuple[Segment, ...]:
    """Split a key path into names, integer indices and ``None`` for ``[*]``."""
    if not path.strip():
        raise ValueError("key path is empty")
    segments: list[Segment] = []
    pos, expect_name = 0, True
    while pos < len(path):
        m = _TOKEN.match(path, pos)
        if m is None:
            raise ValueError(f"cannot read key path at position {pos}: {path[pos:]!r}")
        if m.group("dot") is not None:
            if expect_name:
                raise ValueError(f"empty name at position {pos}")
            expect_name = True
        elif m.group("name") is not None:
            if not expect_name:
                raise ValueError(f"a name must follow a dot at position {pos}")
            segments.append(m.group("name").strip())
            expect_name = False
        elif m.group("index") is not None:
            segments.append(int(m.group("index")))
            expect_name = False
        elif m.group("star") is not None:
            segments.append(None)
            expect_name = False
        else:
            segments.append(m.group("quoted"))
            expect_name = False
        pos = m.end()
    if expect_name:
        raise ValueError("key path ends with a dot")
    return tuple(segments)


def _show_path(segments: tuple[Segment, ...]) -> str:
    out = ""
    for s in segments:
        if s is None:
            out += "[*]"
        elif isinstance(s, int):
            out += f"[{s}]"
        elif re.fullmatch(r"[^.\[\]\"']+", s):
            out += ("." if out else "") + s
        else:
            out += f'["{s}"]'
    return out


def lookup(doc: Any, segments: tuple[Segment, ...], key: str) -> Any:
    """Follow ``segments`` into ``doc``; a failure names the part of ``key`` that was not found."""
    node = doc
    for i, seg in enumerate(segments):
        here = _show_path(segments[: i + 1])
        if seg is None:
            if not isinstance(node, list):
                raise ReadFailure(f"[*] needs a list at {here}, found {type(node).__name__}", key)
            return [lookup(item, segments[i + 1 :], f"{key}") for item in node]
        if isinstance(seg, int):
            if not isinstance(node, list):
                raise ReadFailure(f"index [{seg}] needs a list at {here}, found {type(node).__name__}", key)
            if not -len(node) <= seg < len(node):
                raise ReadFailure(f"index [{seg}] out of range, the list at {here} has {len(node)} items", key)
            node = node[seg]
        else:
            if not isinstance(node, dict):
                raise ReadFailure(f"{here} needs a mapping above it, found {type(node).__name__}", key)
            if seg not in node:
                have = ", ".join(sorted(map(str, node))[:12]) or "none"
                raise ReadFailure(f"missing key {seg!r} (keys there: {have})", key)
            node = node[seg]
    return node


class KeyedOptions(ReaderOptions):
    key: str
    coord_key: str | None = None
    iteration_key: str | None = None

    @field_validator("key", "coord_key", "iteration_key")
    @classmethod
    def _parsable(cls, value: str | None) -> str | None:
        if value is not None:
            parse_key(value)
        return value


def _parse_json(data: bytes) -> Any:
    return json.loads(data)


def _parse_yaml(data: bytes) -> Any:
    loader = getattr(yaml, "CSafeLoader", yaml.SafeLoader)
    return yaml.load(data, Loader=loader)  # noqa: S506 - a safe loader


def _parse_toml(data: bytes) -> Any:
    return tomllib.loads(data.decode("utf-8"))


_PARSERS = {"json": _parse_json, "yaml": _parse_yaml, "toml": _parse_toml}


@lru_cache(maxsize=16)
def _load_cached(path: str, mtime_ns: int, size: int, fmt: str) -> Any:
    # Several quantities usually come from one file; the stat in the key makes a rewrite a miss.
    data = Path(path).read_bytes()
    try:
        return _PARSERS[fmt](data)
    except (ValueError, yaml.YAMLError, tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
        first = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
        raise ReadFailure(f"not valid {fmt.upper()}: {first}") from None


def load(path: Path, fmt: str) -> Any:
    st = path.stat()
    return _load_cached(str(path), st.st_mtime_ns, st.st_size, fmt)


def _read(fmt: str, path: Path, options: KeyedOptions) -> Reading:
    doc = load(path, fmt)
    raw = lookup(doc, parse_key(options.key), options.key)
    if not isinstance(raw, (list, tuple)):
        if options.series:
            raise ReadFailure("series: true, but the key holds a single value", options.key, raw)
        return Reading.scalar(to_number(raw, options.key), options.key)
    values = to_numbers(raw, options.key)
    other_key = options.iteration_key if options.series else options.coord_key
    if other_key is None:
        other = None
    else:
        other = to_numbers(lookup(doc, parse_key(other_key), other_key), other_key)
        if len(other) != len(values):
            raise ReadFailure(
                f"{len(other)} entries, but {options.key} has {len(values)}", other_key, len(other)
            )
    if options.series:
        return Reading.history(values, other, options.key)
    return Reading.profile(range(len(values)) if other is None else other, values, options.key)


def read_json(path: Path, options: KeyedOptions, root: Path | None = None) -> Reading:
    """A value by key path from a JSON file (NaN and Infinity literals are read, then rejected)."""
    return _read("json", path, options)


def read_yaml(path: Path, options: KeyedOptions, root: Path | None = None) -> Reading:
    """A value by key path from a YAML file (safe loader)."""
    return _read("yaml", path, options)


def read_toml(path: Path, options: KeyedOptions, root: Path | None = None) -> Reading:
    """A value by key path from a TOML file."""
    return _read("toml", path, options)
