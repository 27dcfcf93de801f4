"""The package imports one way, down the layers (DEVELOPERS.md): never back up.

Checked by parsing every module's import statements, so a new upward import fails here
rather than surfacing later as a cycle.
"""

from __future__ import annotations

import ast
from pathlib import Path

PKG = Path(__file__).resolve().parents[1] / "studyflow"

# Lower number = lower layer. A module may import its own layer or any lower one.
LAYER = {
    "errors": 0, "fsutil": 0,
    "spec": 1,
    "design": 2,
    "render": 3,
    "workflow": 4,
    "cluster": 5,
    "collect": 6,
    "analysis": 7,
    "report": 8, "bundle": 8,
    "api": 9,
    "cli": 10,
}


def _top(module_parts: list[str]) -> str:
    return module_parts[0] if module_parts else ""


def _imports(path: Path) -> list[tuple[int, str]]:
    """(line, first component under studyflow) of every studyflow import in ``path``."""
    rel = path.relative_to(PKG).with_suffix("").parts
    package = list(rel[:-1]) if rel[-1] != "__init__" else list(rel[:-1])
    tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
    found = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            for alias in node.names:
                parts = alias.name.split(".")
                if parts[0] == "studyflow" and len(parts) > 1:
                    found.append((node.lineno, parts[1]))
        elif isinstance(node, ast.ImportFrom):
            if node.level == 0:
                parts = (node.module or "").split(".")
                if parts[0] == "studyflow":
                    if len(parts) > 1:
                        found.append((node.lineno, parts[1]))
                    else:
                        found += [(node.lineno, a.name) for a in node.names]
            else:
                base = package[: len(package) - (node.level - 1)] if node.level > 1 else package
                parts = base + ((node.module or "").split(".") if node.module else [])
                if parts:
                    found.append((node.lineno, parts[0]))
                else:
                    found += [(node.lineno, a.name) for a in node.names]
    return found


def test_no_upward_imports() -> None:
    bad = []
    for path in sorted(PKG.rglob("*.py")):
        rel = path.relative_to(PKG).parts
        own = rel[0].removesuffix(".py")
        if own == "__init__":
            continue
        if own == "fvsolver":
            # The bundled solver is a separate program: studyflow drives it like any external solver.
            for line, target in _imports(path):
                if target != "fvsolver":
                    bad.append(f"{path.relative_to(PKG)}:{line} imports studyflow.{target}")
            continue
        if own not in LAYER or own.startswith("_"):
            continue
        for line, target in _imports(path):
            if target in LAYER and LAYER[target] > LAYER[own]:
                bad.append(f"{path.relative_to(PKG)}:{line} ({own}) imports studyflow.{target} from a higher layer")
    assert not bad, "upward imports:\n" + "\n".join(bad)


def test_every_package_module_has_a_layer() -> None:
    known = set(LAYER) | {"fvsolver", "__init__", "_bundled"}
    strays = sorted(
        p.name for p in PKG.iterdir()
        if (p.is_dir() and (p / "__init__.py").exists() or p.suffix == ".py") and p.stem not in known
    )
    assert not strays, f"modules without a layer in DEVELOPERS.md / this test: {strays}"
