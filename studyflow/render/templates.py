"""The template folder compiled once per study, in a sandboxed Jinja environment.

``ImmutableSandboxedEnvironment`` refuses attribute access to internals and any mutation of the
context, so a study file from someone else cannot make rendering run code. ``StrictUndefined``
turns every unknown variable into an error instead of an empty string.
"""

from __future__ import annotations

import os
import re
import traceback
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import jinja2
from jinja2.sandbox import ImmutableSandboxedEnvironment, SecurityError

from ..errors import TemplateError, UnsafePathError
from ..fsutil import confined

SKIP_DIRS = {"__pycache__", ".git", ".studyflow"}


def make_environment(loader: jinja2.BaseLoader | None = None) -> ImmutableSandboxedEnvironment:
    return ImmutableSandboxedEnvironment(
        loader=loader, undefined=jinja2.StrictUndefined, keep_trailing_newline=True, autoescape=False,
    )


def explain(exc: BaseException) -> str:
    """Short wording of a Jinja failure: ``unknown variable 'Rey'`` rather than Jinja's own text."""
    msg = str(exc)
    if not isinstance(exc, jinja2.TemplateError):  # raised by the expression itself: 1 / 0, "%d" % "x"
        return f"{type(exc).__name__}: {msg}"
    m = re.match(r"^'([^']+)' is undefined$", msg)
    if m:
        return f"unknown variable {m.group(1)!r}"
    m = re.match(r"^'[^']+' has no attribute '([^']+)'$", msg)
    if m:
        return f"unknown attribute {m.group(1)!r}"
    if isinstance(exc, SecurityError):
        return f"refused by the sandbox: {msg}"
    return msg


def error_line(exc: BaseException, filename: str) -> int | None:
    """The template line of a render-time error: Jinja maps its frames back to template lines."""
    line = getattr(exc, "lineno", None)
    if line:
        return line
    for frame in reversed(traceback.extract_tb(exc.__traceback__)):
        if frame.filename == filename:
            return frame.lineno
    return None


@dataclass(frozen=True)
class TemplateFile:
    rel: str  # POSIX path inside the template folder (and inside each case)
    path: Path
    template: jinja2.Template | None  # None: binary, copied as it is
    raw: bytes = field(repr=False, default=b"")


@dataclass
class TemplateSet:
    root: Path
    files: list[TemplateFile]

    def rels(self) -> set[str]:
        return {f.rel for f in self.files}


def _is_binary(data: bytes) -> bool:
    if b"\0" in data[:8192]:
        return True
    try:
        data.decode("utf-8")
    except UnicodeDecodeError:
        return True
    return False


def load_templates(root: Path) -> TemplateSet:
    """Compile every text file under ``root`` (sub-folders kept); report every syntax error at once."""
    root = root.resolve()
    if not root.is_dir():
        raise TemplateError(f"template folder does not exist: {root}")
    env = make_environment(jinja2.FileSystemLoader(str(root)))
    files: list[TemplateFile] = []
    errors: list[str] = []
    for dirpath, dirnames, filenames in os.walk(root, followlinks=False):
        dirnames[:] = sorted(d for d in dirnames if d not in SKIP_DIRS)
        for name in sorted(filenames):
            path = Path(dirpath) / name
            rel = path.relative_to(root).as_posix()
            try:
                real = confined(root, rel, "template file")
            except UnsafePathError as exc:
                errors.append(f"{path}: {exc}")
                continue
            if not real.is_file():
                errors.append(f"{path}: template entries must be regular files")
                continue
            data = real.read_bytes()
            if _is_binary(data):
                files.append(TemplateFile(rel, path, None, data))
                continue
            try:
                files.append(TemplateFile(rel, path, env.get_template(rel), data))
            except jinja2.TemplateSyntaxError as exc:
                errors.append(f"{path}:{exc.lineno}: template syntax error: {exc.message}")
    if errors:
        raise TemplateError("\n".join(errors) if len(errors) == 1 else
                            f"{len(errors)} template errors:\n" + "\n".join(f"  - {e}" for e in errors))
    return TemplateSet(root, files)


def render_file(tf: TemplateFile, context: dict[str, Any], case_id: str) -> bytes:
    # Binary, or text without a Jinja delimiter (nor a CR that Jinja would turn into LF): as it is.
    if tf.template is None or (b"{" not in tf.raw and b"\r" not in tf.raw):
        return tf.raw
    try:
        return tf.template.render(context).encode("utf-8")
    except Exception as exc:  # noqa: BLE001 - whatever a template's expression raises is the template's error
        line = error_line(exc, tf.template.filename or "")
        where = f"{tf.path}:{line}" if line else str(tf.path)
        raise TemplateError(f"{where}: {explain(exc)} (case {case_id})") from None


class TokenRenderer:
    """Renders one command-line argument template at a time (compiled once per distinct token)."""

    def __init__(self) -> None:
        self.env = make_environment()
        self._cache: dict[str, jinja2.Template] = {}

    def render(self, token: str, context: dict[str, Any]) -> str:
        if "{" not in token:  # no Jinja delimiter: the text renders to itself
            return token
        tpl = self._cache.get(token)
        if tpl is None:
            tpl = self._cache[token] = self.env.from_string(token)
        return tpl.render(context)
