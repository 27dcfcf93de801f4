"""Rendering case folders: sandboxed Jinja, StrictUndefined, write-if-changed, argv token by token."""

from __future__ import annotations

import json
import os
from pathlib import Path

import pytest

from studyflow.design import build_design
from studyflow.errors import TemplateError
from studyflow.render import make_renderer, render_all, render_study
from studyflow.render.cases import split_command
from studyflow.spec import load_study

STUDY = """\
title: render test
template: tpl
constants: {solver: mysolver}
parameters:
  - kind: table
    points: [{id: p1, Re: 100, fluid: "water; rm -rf /"}]
mesh: {levels: 2, ratio: 2, counts: {nx: 4, ny: 2}, extent: [2.0, 1.0]}
steps:
  - name: solve
    run: "{{ solver }} --fluid {{ fluid }} --nx={{ mesh.nx }} case.toml"
    reads: [case.toml]
    writes: [out.json]
"""


def make(tmp_path: Path, files: dict[str, bytes | str], study: str = STUDY) -> Path:
    root = tmp_path / "s"
    for rel, data in files.items():
        p = root / "tpl" / rel
        p.parent.mkdir(parents=True, exist_ok=True)
        p.write_bytes(data if isinstance(data, bytes) else data.encode())
    (root / "study.yaml").write_text(study)
    return root


BASE = {"case.toml": "Re = {{ Re }}\nnx = {{ mesh.nx }}\nh = {{ mesh.h }}\ncase = '{{ case }}'\n"}


def render(root: Path):
    s = load_study(root)
    return s, render_study(s, build_design(s))


def test_files_subfolders_binary_and_case_json(tmp_path: Path) -> None:
    blob = bytes(range(256)) * 4  # not UTF-8: copied byte for byte
    root = make(tmp_path, {**BASE, "sub/dir/extra.txt": "level {{ mesh.level }} of {{ mesh.levels }}\n",
                           "mesh.bin": blob})
    s, result = render(root)
    case = root / "cases" / "p1--m1"
    assert result.changed == ("p1--m0", "p1--m1")
    # h = (2*1/(8*4))^(1/2) = 0.25 on level 1 (Celik et al. 2008 eq. 1).
    assert (case / "case.toml").read_text() == "Re = 100\nnx = 8\nh = 0.25\ncase = 'p1--m1'\n"
    assert (case / "sub/dir/extra.txt").read_text() == "level 1 of 2\n"
    assert (case / "mesh.bin").read_bytes() == blob
    doc = json.loads((case / ".studyflow/case.json").read_text())
    assert doc["params"] == {"Re": 100, "fluid": "water; rm -rf /"}
    assert doc["mesh"]["sizes"] == {"nx": 8, "ny": 4} and doc["mesh"]["ratio"] == 2.0


def test_argv_is_split_before_rendering(tmp_path: Path) -> None:
    root = make(tmp_path, BASE)
    render(root)
    step = json.loads((root / "cases/p1--m0/.studyflow/solve.step.json").read_text())
    # The value with a space and a ';' stays one argument and is never seen by a shell.
    assert step["argv"] == ["mysolver", "--fluid", "water; rm -rf /", "--nx=4", "case.toml"]
    assert split_command("a '{{ x }} y' \"b c\" {{ f(1, 2) }}") == ["a", "{{ x }} y", "b c", "{{ f(1, 2) }}"]


def test_write_only_when_bytes_change(tmp_path: Path) -> None:
    root = make(tmp_path, BASE)
    render(root)
    f = root / "cases/p1--m0/case.toml"
    old = f.stat().st_mtime_ns
    os.utime(f, ns=(old - 10**9, old - 10**9))  # make any rewrite visible
    _, again = render(root)
    assert again.changed == ()
    assert f.stat().st_mtime_ns == old - 10**9


def test_unknown_variable_names_template_line_and_variable(tmp_path: Path) -> None:
    root = make(tmp_path, {"case.toml": "Re = {{ Re }}\n\nU = {{ velocity }}\n"})
    s = load_study(root)
    with pytest.raises(TemplateError) as info:
        render_study(s, build_design(s))
    assert str(info.value) == f"{root / 'tpl' / 'case.toml'}:3: unknown variable 'velocity' (case p1--m0)"
    assert not (root / "cases").exists()  # nothing written when any case fails


def test_unknown_mesh_size_and_bad_syntax(tmp_path: Path) -> None:
    root = make(tmp_path, {"case.toml": "nz = {{ mesh.nz }}\n"})
    s = load_study(root)
    with pytest.raises(TemplateError) as info:
        render_study(s, build_design(s))
    assert str(info.value) == f"{root / 'tpl' / 'case.toml'}:1: unknown attribute 'nz' (case p1--m0)"
    root2 = make(tmp_path / "b", {"case.toml": "a\n{% if Re %}\nno end\n"})
    with pytest.raises(TemplateError) as info:
        make_renderer(load_study(root2))
    assert str(info.value).startswith(f"{root2 / 'tpl' / 'case.toml'}:2: template syntax error: Unexpected end")


def test_unknown_variable_in_command(tmp_path: Path) -> None:
    root = make(tmp_path, BASE, STUDY.replace("{{ solver }}", "{{ solvr }}"))
    s = load_study(root)
    with pytest.raises(TemplateError) as info:
        render_all(s, build_design(s))
    assert str(info.value) == (f"{root / 'study.yaml'}: steps[0].run: argument '{{{{ solvr }}}}': "
                               f"unknown variable 'solvr' (case p1--m0)")


def test_sandbox_refuses_internals(tmp_path: Path) -> None:
    root = make(tmp_path, {"case.toml": "{{ ''.__class__.__mro__[1].__subclasses__() }}\n"})
    s = load_study(root)
    with pytest.raises(TemplateError) as info:
        render_study(s, build_design(s))
    assert str(info.value) == (f"{root / 'tpl' / 'case.toml'}:1: refused by the sandbox: access to attribute "
                               f"'__class__' of 'str' object is unsafe. (case p1--m0)")
    assert not (root / "cases").exists()


def test_removed_cases_reported_not_deleted(tmp_path: Path) -> None:
    two = STUDY.replace("points: [{id: p1, Re: 100, fluid: \"water; rm -rf /\"}]",
                        "points: [{id: p1, Re: 100, fluid: w}, {id: p2, Re: 200, fluid: w}]")
    root = make(tmp_path, BASE, two)
    render(root)
    (root / "study.yaml").write_text(two.replace(", {id: p2, Re: 200, fluid: w}", ""))
    _, result = render(root)
    assert result.removed == ("p2--m0", "p2--m1")
    assert (root / "cases/p2--m1/case.toml").exists()


def test_time_limit_in_step_json(tmp_path: Path) -> None:
    root = make(tmp_path, BASE, STUDY + "resources: {time_min: 2}\n")
    render(root)
    step = json.loads((root / "cases/p1--m0/.studyflow/solve.step.json").read_text())
    assert step["time_limit_s"] == 120.0 and step["upstream"] is None
