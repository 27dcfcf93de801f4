"""The registry of collectors: built-in readers by name, plus those other packages register.

A collector is an options model (pydantic, validated from the study file before anything runs) and
a function ``read(path, options, root) -> Reading``: ``path`` is the confined file in the case
folder, ``root`` the case folder itself (for formats that refer to other files). Another package
adds one through the entry-point group ``studyflow.collectors``; the entry point names the
collector and points at a module (or any object) with attributes ``Options`` and ``read``, or at a
``Collector``. A built-in name cannot be taken over.
"""

from __future__ import annotations

import importlib
from dataclasses import dataclass
from importlib import metadata
from pathlib import Path
from typing import Any, Callable

from pydantic import BaseModel

from ..errors import CollectError, Problem
from .values import Reading

ENTRY_POINT_GROUP = "studyflow.collectors"

ReadFunction = Callable[[Path, Any, Path], Reading]


@dataclass(frozen=True)
class Collector:
    name: str
    options: type[BaseModel]
    read: ReadFunction
    origin: str = "built-in"


# name -> (module, options class, read function); imported only when used (meshio is slow to load).
_BUILTIN: dict[str, tuple[str, str, str]] = {
    "json": ("studyflow.collect.readers.keyed", "KeyedOptions", "read_json"),
    "yaml": ("studyflow.collect.readers.keyed", "KeyedOptions", "read_yaml"),
    "toml": ("studyflow.collect.readers.keyed", "KeyedOptions", "read_toml"),
    "csv": ("studyflow.collect.readers.table", "CsvOptions", "read_csv"),
    "log": ("studyflow.collect.readers.textlog", "LogOptions", "read_log"),
    "field": ("studyflow.collect.readers.field", "FieldOptions", "read_field"),
}

_loaded: dict[str, Collector] = {}
_plugins: dict[str, metadata.EntryPoint] | None = None


def _entry_points() -> dict[str, metadata.EntryPoint]:
    global _plugins
    if _plugins is None:
        _plugins = {ep.name: ep for ep in metadata.entry_points(group=ENTRY_POINT_GROUP) if ep.name not in _BUILTIN}
    return _plugins


def refresh() -> None:
    """Forget loaded plugins, e.g. after installing a package in a running notebook."""
    global _plugins
    _plugins = None
    for name in [n for n, c in _loaded.items() if c.origin != "built-in"]:
        del _loaded[name]


def names() -> list[str]:
    """Every collector name a study file may use in ``from:``."""
    return sorted(set(_BUILTIN) | set(_entry_points()))


def _from_object(name: str, obj: Any, origin: str) -> Collector:
    if isinstance(obj, Collector):
        return obj
    options, read = getattr(obj, "Options", None), getattr(obj, "read", None)
    if not (isinstance(options, type) and issubclass(options, BaseModel) and callable(read)):
        raise CollectError(Problem(origin, f"{ENTRY_POINT_GROUP}.{name}", obj,
                                   "a collector needs a pydantic model 'Options' and a function 'read'"))
    return Collector(name, options, read, origin)


def get(name: str) -> Collector:
    """The collector called ``name``; ``KeyError`` if there is none."""
    if name in _loaded:
        return _loaded[name]
    if name in _BUILTIN:
        module, opts, fn = _BUILTIN[name]
        mod = importlib.import_module(module)
        coll = Collector(name, getattr(mod, opts), getattr(mod, fn))
    else:
        ep = _entry_points().get(name)
        if ep is None:
            raise KeyError(name)
        origin = f"entry point {ep.value}"
        try:
            obj = ep.load()
        except Exception as exc:  # a broken plugin is an input problem, not a crash
            raise CollectError(Problem(origin, f"{ENTRY_POINT_GROUP}.{name}", ep.value,
                                       f"cannot be loaded: {type(exc).__name__}: {exc}")) from exc
        coll = _from_object(name, obj, origin)
    _loaded[name] = coll
    return coll
