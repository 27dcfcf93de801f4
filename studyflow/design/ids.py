"""Stable, readable, filesystem-safe ids for points and cases.

A point id joins ``<name><value>`` pairs with ``_`` in declaration order, e.g. ``Re20000_tilt-2``.
Numbers are written with at most 6 significant digits in a fixed, platform-independent format
(Python's ``format(x, '.6g')`` on IEEE doubles, exponent without ``+`` or leading zeros:
``1e-05`` -> ``1e-5``). Strings keep letters, digits, ``.`` and ``-``; any other run of characters
becomes one ``-``. When two points would share an id (values equal to 6 digits, or an id over 80
characters) every colliding id gets ``_h`` plus 6 hex digits of the SHA-256 of the point's exact
values, so ids stay the same on every machine. A case id is ``<point-id>--m<level>``.
"""

from __future__ import annotations

import hashlib
import re
from collections import Counter

MAX_ID = 80
_UNSAFE = re.compile(r"[^A-Za-z0-9.]+")


def format_value(value: object) -> str:
    """Filesystem-safe text of one parameter value."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        text = format(value, ".6g")
        mant, sep, exp = text.partition("e")
        if sep:
            sign = "-" if exp.startswith("-") else ""
            text = f"{mant}e{sign}{exp.lstrip('+-').lstrip('0') or '0'}"
        return text
    text = _UNSAFE.sub("-", str(value)).strip("-")
    return text or "empty"


def raw_point_id(values: tuple[tuple[str, object], ...]) -> str:
    if not values:
        return "base"
    return "_".join(f"{name}{format_value(v)}" for name, v in values)


def short_hash(text: str, n: int = 6) -> str:
    return hashlib.sha256(text.encode("utf-8")).hexdigest()[:n]


def assign_point_ids(candidates: list[tuple[str | None, str, str]]) -> list[str]:
    """Final ids for ``(given_id, readable_id, canonical_values)`` triples, in order.

    Given ids are kept as they are (the spec checks them for uniqueness). A readable id that is
    too long or shared by points with different values gets a hash suffix of its exact values.
    """
    counts = Counter(readable for given, readable, _ in candidates if given is None)
    given = {g for g, _, _ in candidates if g is not None}
    out = []
    for g, readable, canonical in candidates:
        if g is not None:
            out.append(g)
            continue
        if counts[readable] > 1 or len(readable) > MAX_ID or readable in given:
            out.append(f"{readable[:MAX_ID - 8]}_h{short_hash(canonical)}")
        else:
            out.append(readable)
    return out


def case_id(point_id: str, level: int) -> str:
    return f"{point_id}--m{level}"
