"""The study-file loader: the documented example loads, and malformed files fail with exact messages.

Every malformed file must be reported before anything is rendered or run (checked at the end
through ``api.run``: no case folder appears).
"""

from __future__ import annotations

import json
import re
import textwrap
from pathlib import Path

import pytest

from studyflow import api
from studyflow.errors import EXIT_INVALID_INPUT, StudySpecError
from studyflow.spec import Study, load_study

REPO = Path(__file__).resolve().parents[2]

GOOD = """\
title: Heat loss of an invented duct
template: tpl
constants: {solver: mysolver}
parameters:
  - kind: product
    values: {Re: [1.0e4, 3.0e4]}
mesh: {levels: 3, ratio: 2, counts: {nx: 8}}
steps:
  - name: solve
    run: "{{ solver }} case.toml"
    reads: [case.toml]
    writes: [out.json]
quantities:
  q: {from: json, file: out.json, key: q}
"""


def write_study(tmp_path: Path, text: str, files: dict[str, str] | None = None) -> Path:
    root = tmp_path / "study"
    (root / "tpl").mkdir(parents=True, exist_ok=True)
    for rel, content in (files or {"case.toml": "Re = {{ Re }}\n"}).items():
        (root / "tpl" / rel).parent.mkdir(parents=True, exist_ok=True)
        (root / "tpl" / rel).write_text(content)
    (root / "study.yaml").write_text(textwrap.dedent(text))
    return root


def problems_of(root: Path) -> list[str]:
    """``key: message (got value)`` of every problem, without the file:line prefix."""
    with pytest.raises(StudySpecError) as info:
        load_study(root)
    assert info.value.exit_code == EXIT_INVALID_INPUT
    return [str(p).split(": ", 1)[1] for p in info.value.problems]


def documented_example() -> str:
    """The study-file block of DEVELOPERS.md, so the schema and the guide cannot drift apart."""
    text = (REPO / "DEVELOPERS.md").read_text(encoding="utf-8")
    block = re.search(r"## The study file.*?```yaml\n(.*?)```", text, re.S)
    assert block, "DEVELOPERS.md lost its study-file example"
    return block.group(1)


def test_documented_example_loads(tmp_path: Path) -> None:
    yaml_text = documented_example().replace("../../templates/plate", "tpl")
    root = write_study(tmp_path, yaml_text, {"case.toml": "Re = {{ Re }}\n", "post.py": "print(1)\n"})
    study = load_study(root)
    assert [s.name for s in study.steps] == ["solve", "post"]
    assert [b.kind for b in study.parameters] == ["product", "zip", "table", "one-at-a-time", "lhs"]
    # YAML 1.2 reading of exponent floats: 1.0e4 is a number (YAML 1.1 would make it a string).
    assert study.parameters[0].values["Re"] == [1.0e4, 3.0e4]
    assert study.parameters[4].ranges["Re"].scale == "log"
    assert study.mesh.ratios() == [2.0, 2.0]
    assert study.root == root.resolve()


def test_good_study_and_its_schema(tmp_path: Path) -> None:
    study = load_study(write_study(tmp_path, GOOD) / "study.yaml")
    assert study.title == "Heat loss of an invented duct"
    schema = Study.model_json_schema(by_alias=True)
    assert {"template", "steps"} <= set(schema["required"])
    json.dumps(schema)  # serialisable as JSON Schema


MALFORMED = [
    # (what is wrong, YAML edit applied to GOOD, expected problems as "key: message (got value)")
    ("unknown top-level key with a close match",
     lambda t: t.replace("quantities:", "quantites:"),
     ["quantites: is not a known key; did you mean 'quantities'? (got {'q': {'from': 'json', 'file': "
      "'out.json', 'key': 'q'}})"]),
    ("template folder missing",
     lambda t: t.replace("template: tpl", "template: nowhere"),
     ["template: template folder does not exist: {root}/nowhere (got 'nowhere')"]),
    ("no steps",
     lambda t: t.split("steps:")[0] + "steps: []\n",
     ["steps: must have at least 1 item (got [])"]),
    ("duplicate step name",
     lambda t: t.replace("quantities:", "  - name: solve\n    run: [echo]\nquantities:"),
     ["steps[1].name: step name is used twice (also steps[0]) (got 'solve')"]),
    ("absolute write",
     lambda t: t.replace("writes: [out.json]", "writes: [/etc/out.json]"),
     ["steps[0].writes[0]: must be relative to the case folder, not absolute (got '/etc/out.json')"]),
    ("read leaving the case",
     lambda t: t.replace("reads: [case.toml]", "reads: [../case.toml]"),
     ["steps[0].reads[0]: must stay inside the case folder ('..' is not allowed) (got '../case.toml')"]),
    ("read nobody provides",
     lambda t: t.replace("reads: [case.toml]", "reads: [case.toml, mesh.msh]"),
     ["steps[0].reads[1]: is neither a file of the template folder nor written by an earlier step "
      "(got 'mesh.msh')"]),
    ("reserved parameter name",
     lambda t: t.replace("values: {Re: [1.0e4, 3.0e4]}", "values: {mesh: [1, 2]}"),
     ["parameters[0].values.mesh: parameter name is a reserved name of the template context "
      "(case, mesh, params, point) (got 'mesh')"]),
    ("parameter name not an identifier",
     lambda t: t.replace("values: {Re: [1.0e4, 3.0e4]}", "values: {2Re: [1, 2]}"),
     ["parameters[0].values.2Re: parameter name must be a valid identifier (letters, digits, '_', not "
      "starting with a digit) (got '2Re')"]),
    ("unknown block kind",
     lambda t: t.replace("kind: product", "kind: grid"),
     ["parameters[0]: kind must be one of product, zip, table, one-at-a-time, lhs, sobol (got 'grid')"]),
    ("zip lists of unequal length",
     lambda t: t.replace("kind: product\n    values: {Re: [1.0e4, 3.0e4]}",
                         "kind: zip\n    values: {Re: [1.0e4, 3.0e4], U: [1.0]}"),
     ["parameters[0].values: zip lists must have equal lengths (Re: 2, U: 1) (got {'Re': 2, 'U': 1})"]),
    ("range with low above high",
     lambda t: t.replace("kind: product\n    values: {Re: [1.0e4, 3.0e4]}",
                         "kind: lhs\n    samples: 4\n    ranges: {Re: {low: 5.0e4, high: 1.0e4}}"),
     ["parameters[0].ranges.Re.low: low must be less than high (10000.0) (got 50000.0)"]),
    ("log range through zero",
     lambda t: t.replace("kind: product\n    values: {Re: [1.0e4, 3.0e4]}",
                         "kind: sobol\n    samples: 4\n    ranges: {Re: {low: 0, high: 1.0e4, scale: log}}"),
     ["parameters[0].ranges.Re.low: a log-scaled range needs low > 0 (got 0)"]),
    ("refinement ratio not above one",
     lambda t: t.replace("ratio: 2", "ratio: 1"),
     ["mesh.ratio: every refinement ratio must be greater than 1 (got 1)"]),
    ("per-level ratios of the wrong length",
     lambda t: t.replace("ratio: 2", "ratio: [2, 1.5, 1.5]"),
     ["mesh.ratio: a list of ratios needs levels - 1 = 2 entries, one per refinement step (got [2, 1.5, 1.5])"]),
    ("two size kinds at once",
     lambda t: t.replace("counts: {nx: 8}", "counts: {nx: 8}, spacings: {dx: 0.1}"),
     ["mesh: give exactly one of counts, spacings or list (got ['counts', 'spacings'])"]),
    ("duplicate quantity",
     lambda t: t + "  q: {from: json, file: out.json, key: r}\n",
     ["quantities.q: key given twice (first on line 14) (got 'q')"]),
    ("wrong type of a count",
     lambda t: t.replace("levels: 3", "levels: three"),
     ["mesh.levels: must be a valid integer, unable to parse string as an integer (got 'three')"]),
    ("negative retries",
     lambda t: t + "retries: -1\n",
     ["retries: must be greater than or equal to 0 (got -1)"]),
    ("empty command",
     lambda t: t.replace('run: "{{ solver }} case.toml"', 'run: ""'),
     ["steps[0].run: must not be empty (got '')"]),
    ("one-at-a-time varying a name not in base",
     lambda t: t.replace("kind: product\n    values: {Re: [1.0e4, 3.0e4]}",
                         "kind: one-at-a-time\n    base: {Re: 1.0e4}\n    vary: {U: [1.0]}"),
     ["parameters[0].vary.U: varied parameter is not in base (got 'U')"]),
]


@pytest.mark.parametrize("what,edit,expected", MALFORMED, ids=[m[0] for m in MALFORMED])
def test_malformed_study_files(tmp_path: Path, what: str, edit, expected: list[str]) -> None:
    root = write_study(tmp_path, edit(GOOD))
    expected = [e.replace("{root}", str(root.resolve())) for e in expected]
    assert problems_of(root) == expected
    # Nothing is rendered or run for an invalid study.
    with pytest.raises(StudySpecError):
        api.run(root, progress=False)
    assert not (root / "cases").exists()
    assert not (root / ".studyflow").exists()


def test_every_problem_reported_at_once_with_lines(tmp_path: Path) -> None:
    text = GOOD.replace("levels: 3", "levels: 0").replace("writes: [out.json]", "writes: [../x]")
    root = write_study(tmp_path, text)
    with pytest.raises(StudySpecError) as info:
        load_study(root)
    msg = str(info.value)
    assert msg.splitlines()[0] == f"{root / 'study.yaml'}: 2 problems in the study file"
    # Problems name file:line, key path, message and value.
    assert f"{root / 'study.yaml'}:7: mesh.levels: must be greater than or equal to 1 (got 0)" in msg
    assert (f"{root / 'study.yaml'}:12: steps[0].writes[0]: must stay inside the case folder "
            f"('..' is not allowed) (got '../x')") in msg


def test_yaml_syntax_error_names_line(tmp_path: Path) -> None:
    root = write_study(tmp_path, GOOD.replace("steps:\n", "steps:\n  - name: [unclosed\n", 1))
    with pytest.raises(StudySpecError) as info:
        load_study(root)
    (problem,) = info.value.problems
    assert problem.file == f"{root / 'study.yaml'}:10"
    assert problem.message.startswith("YAML syntax error column")


def test_missing_study_file(tmp_path: Path) -> None:
    with pytest.raises(StudySpecError) as info:
        load_study(tmp_path)
    assert str(info.value) == f"{tmp_path / 'study.yaml'}: no study file here (got '{tmp_path}')"
