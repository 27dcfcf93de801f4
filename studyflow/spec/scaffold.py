"""Scaffold a new study from a bundled example: copy its study file and its template folder."""

from __future__ import annotations

import re
import shutil
from pathlib import Path

from ..errors import Problem, StudySpecError, UnsafePathError
from .loader import STUDY_FILE
from .yamlsource import read_yaml

TEMPLATE_FOLDER = "template"


def example_roots() -> list[Path]:
    """Where bundled example studies live: ``<repo>/studies`` in a source checkout, and
    ``studyflow/_bundled/studies`` in an installed package."""
    pkg = Path(__file__).resolve().parents[1]
    return [p for p in (pkg.parent / "studies", pkg / "_bundled" / "studies") if p.is_dir()]


def list_examples() -> dict[str, Path]:
    found: dict[str, Path] = {}
    for root in example_roots():
        for study in sorted(root.glob(f"*/{STUDY_FILE}")):
            found.setdefault(study.parent.name, study.parent)
    return found


def new_study(example: str, dest: str | Path) -> Path:
    """Copy example ``example`` to the new folder ``dest`` with its template in ``dest/template``.

    The ``template:`` line of the copied study file is rewritten to point at the copy; the rest
    of the file (comments included) is kept as it is.
    """
    examples = list_examples()
    if example not in examples:
        known = ", ".join(sorted(examples)) or "none found"
        raise StudySpecError(Problem("studyflow new", "example", example, f"no such example (known: {known})"))
    dest = Path(dest)
    if dest.exists() and any(dest.iterdir()):
        raise UnsafePathError(f"{dest} exists and is not empty; choose a new folder")
    src_dir = examples[example]
    src_file = src_dir / STUDY_FILE
    src = read_yaml(src_file)
    template = src.data.get("template") if isinstance(src.data, dict) else None
    if not isinstance(template, str):
        raise StudySpecError(Problem(str(src_file), "template", template, "the example has no template folder"))
    template_dir = (src_dir / template).resolve()
    dest.mkdir(parents=True, exist_ok=True)
    ignore = shutil.ignore_patterns("cases", "results", "report", ".studyflow", ".snakemake", "__pycache__")
    for entry in src_dir.iterdir():
        if entry.name in ("cases", "results", "report", ".studyflow", ".snakemake"):
            continue
        target = dest / entry.name
        if entry.is_dir():
            if entry.resolve() == template_dir:
                continue
            shutil.copytree(entry, target, ignore=ignore)
        else:
            shutil.copy2(entry, target)
    shutil.copytree(template_dir, dest / TEMPLATE_FOLDER, ignore=ignore)
    text = src_file.read_text(encoding="utf-8")
    new_text, n = re.subn(r"(?m)^(template:\s*)(['\"]?)[^#\n]*?\2(\s*(#.*)?)$",
                          lambda m: f"{m.group(1)}{TEMPLATE_FOLDER}{m.group(3)}", text, count=1)
    if n != 1:
        raise StudySpecError(Problem(str(src_file), "template", template, "cannot find the template line to rewrite"))
    (dest / STUDY_FILE).write_text(new_text, encoding="utf-8")
    return dest
