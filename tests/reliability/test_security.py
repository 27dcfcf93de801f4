"""Security probes: the template sandbox, literal arguments, paths that must stay in the study,
archives, and no shell anywhere in the package.

The probe strings are the usual server-side template injection payloads against Jinja (common
practice in security testing): walk from a literal to ``object.__subclasses__()``, reach a
function's ``__globals__`` through the built-in ``cycler``/``joiner``/``lipsum``/``namespace``, read
the template's private context, mutate the context, or smuggle an attribute through ``format``.
"""

from __future__ import annotations

import ast
import json
import re
import shlex
import sys
import tarfile
from pathlib import Path

import pytest
from relsupport import run_direct, write_study

from studyflow import api
from studyflow.bundle.unpack import safe_extract
from studyflow.design.ids import format_value
from studyflow.errors import StudySpecError, TemplateError, UnsafePathError
from studyflow.spec.checks import POINT_ID
from studyflow.workflow.rules_support import RuleSet

PACKAGE = Path(api.__file__).resolve().parent

# --- templates cannot reach Python internals --------------------------------------------------------

PROBES = [
    "{{ ''.__class__.__mro__[1].__subclasses__() }}",
    "{{ ().__class__.__base__.__subclasses__() }}",
    "{{ cycler.__init__.__globals__ }}",
    "{{ cycler.__init__.__globals__.os.popen('id').read() }}",
    "{{ joiner.__init__.__globals__ }}",
    "{{ lipsum.__globals__['os'] }}",
    "{{ namespace.__init__.__globals__ }}",
    "{{ self._TemplateReference__context }}",
    "{{ self.__init__.__globals__ }}",
    "{{ params.__class__ }}",
    "{{ mesh.items.__self__.__class__ }}",
    "{{ ''|attr('__class__') }}",
    "{{ '{0.__class__}'.format(1) }}",
    "{{ params.update({'a': 1}) }}",
    "{{ params.clear() }}",
    "{% set x = [1] %}{{ x.append(2) }}",
    "{{ range.__globals__ }}",
]


def _probe_study(root: Path, template_text: str, run: str = "[sh, solve.sh]") -> Path:
    study = f"""\
title: sandbox probe
template: tpl
parameters:
  - kind: table
    points: [{{id: p1, a: 1}}]
steps:
  - name: solve
    run: {run}
    reads: [solve.sh]
    writes: [out.json]
"""
    return write_study(root, study, {"solve.sh": "echo '{\"q\": 1}' > out.json\n", "case.txt": template_text})


@pytest.mark.parametrize("probe", PROBES)
def test_template_probe_is_refused_by_the_sandbox(probe: str, tmp_path: Path) -> None:
    root = _probe_study(tmp_path / "s", f"x = {probe}\n")
    with pytest.raises(TemplateError) as info:
        api.render(root)
    assert "refused by the sandbox" in str(info.value), str(info.value)
    assert "case.txt:1" in str(info.value)
    assert not (root / "cases").exists()  # nothing rendered


@pytest.mark.parametrize("probe", PROBES[:4] + PROBES[7:8])
def test_step_command_probe_is_refused_by_the_sandbox(probe: str, tmp_path: Path) -> None:
    root = _probe_study(tmp_path / "s", "a = {{ a }}\n", run=json.dumps(["sh", "solve.sh", probe]))
    with pytest.raises(TemplateError) as info:
        api.plan(root)
    assert "refused by the sandbox" in str(info.value) and "steps[0].run" in str(info.value)


@pytest.mark.parametrize("target", ["../secret.txt", "../../secret.txt", "/etc/passwd", "sub/../../secret.txt"])
def test_template_include_cannot_leave_the_template_folder(target: str, tmp_path: Path) -> None:
    (tmp_path / "secret.txt").write_text("TOPSECRET\n")
    root = _probe_study(tmp_path / "s", f"{{% include '{target}' %}}\n")
    with pytest.raises(TemplateError) as info:
        api.render(root)
    assert "case.txt:1" in str(info.value) and "TOPSECRET" not in str(info.value)
    assert not (root / "cases").exists()


def test_template_file_linked_outside_is_refused(tmp_path: Path) -> None:
    secret = tmp_path / "secret.txt"
    secret.write_text("password\n")
    root = _probe_study(tmp_path / "s", "a = {{ a }}\n")
    (root / "tpl" / "leak.txt").symlink_to(secret)
    with pytest.raises(TemplateError) as info:
        api.render(root)
    assert "leak.txt" in str(info.value) and "leaves" in str(info.value)
    assert not (root / "cases").exists()


# --- parameter values reach the solver as literal arguments -----------------------------------------

NASTY = {
    "spaces": "two words  here",
    "dquote": 'say "hi"',
    "squote": "it's",
    "subst": "$(touch pwned-subst)",
    "backtick": "`touch pwned-backtick`",
    "semicolon": "x; touch pwned-semicolon",
    "newline": "line1\ntouch pwned-newline",
    "dash": "--help",
    "dashes": "-rf",
    "glob": "*",
    "dollar": "$HOME",
    "pipe": "a | touch pwned-pipe && b",
    "redirect": "> pwned-redirect",
    "braces": "{a,b}",
    "jinja": "{{ 7 * 7 }}{% if true %}x{% endif %}",  # a value is data: never rendered a second time
}

DUMP = """\
import json, sys
with open("argv.json", "w") as fh:
    json.dump(sys.argv[1:], fh)
"""


_VALUES = list(NASTY.values()) + ["plain"] * (-len(NASTY) % 4)
GROUPS = [_VALUES[i:i + 4] for i in range(0, len(_VALUES), 4)]  # four values per case


def _argv_study(root: Path, listed: bool) -> Path:
    """One case per group of four values; the step passes them in the command-string form (split
    before rendering) or the list form (one argument per item)."""
    points = ", ".join("{id: g" + str(i) + ", " + ", ".join(f"v{j}: {json.dumps(v)}" for j, v in enumerate(group)) + "}"
                       for i, group in enumerate(GROUPS))
    if listed:
        run = '["{{ python }}", "dump.py", "{{ v0 }}", "-{{ v1 }}", "{{ v2 }}={{ v3 }}"]'
    else:
        run = """'{{ python }} dump.py {{ v0 }} --opt={{ v1 }} "{{ v2 }} tail" ''{{ v3 }}'' {{ case }}'"""
    study = f"""\
title: literal arguments
template: tpl
constants: {{python: {json.dumps(sys.executable)}}}
parameters:
  - kind: table
    points: [{points}]
steps:
  - name: solve
    run: {run}
    reads: [dump.py]
    writes: [argv.json]
"""
    return write_study(root, study, {"dump.py": DUMP})


def _check_literal_arguments(root: Path, listed: bool) -> None:
    for i, (v0, v1, v2, v3) in enumerate(GROUPS):
        argv = json.loads((root / "cases" / f"g{i}--m0" / "argv.json").read_text())
        want = [v0, f"-{v1}", f"{v2}={v3}"] if listed else [v0, f"--opt={v1}", f"{v2} tail", v3, f"g{i}--m0"]
        assert argv == want
    pwned = [p for p in root.parent.rglob("*") if p.name.startswith("pwned")] + list(Path.home().glob("pwned*"))
    assert pwned == [], pwned


def test_parameter_values_reach_the_solver_as_literal_arguments(tmp_path: Path) -> None:
    """Through the real workflow engine (Snakemake's shell line included), in a study folder whose
    own name holds quotes, spaces and a command substitution."""
    root = _argv_study(tmp_path / "st $(touch pwned-folder) 'q' \"dq\"", listed=False)
    out = api.run(root, cores=2, progress=False)
    assert out.exit_code == 0, [(c.case, c.reason) for c in out.failed]
    _check_literal_arguments(root, listed=False)


def test_list_form_arguments_are_literal_too(tmp_path: Path) -> None:
    root = _argv_study(tmp_path / "s", listed=True)
    run_direct(root)  # the step runner alone (what every engine job runs)
    _check_literal_arguments(root, listed=True)


def test_engine_shell_line_keeps_every_piece_one_argument() -> None:
    """The one shell line of the packaged rules: the study prefix is quoted, case ids and step
    names are checked names, so each stays one argument whatever the folder is called."""
    prefix = "studies/a b $(touch x) 'q'/"
    rules = RuleSet([], prefix, 0)
    line = rules.shell_command.replace("{{", "\0").replace("}}", "\1")
    line = line.replace("{wildcards.case}", "Re1e5--m0").replace("{params.step}", "solve")
    line = line.replace("\0", "{").replace("\1", "}")
    argv = shlex.split(line)
    # python -S <the step runner, by path or -m module> <case folder> <step>: the folder is one argument
    assert argv[:2] == [sys.executable, "-S"] and argv[-2:] == [f"{prefix}cases/Re1e5--m0", "solve"]
    assert argv[2:-2] in (["-m", "studyflow.workflow.runstep"], [str(PACKAGE / "workflow" / "runstep.py")])


# --- case ids and collector paths cannot leave the study folder --------------------------------------

@pytest.mark.parametrize("value", ["../../etc", "/etc/passwd", "a/b", "..", ".", "~root", "-rf", "C:\\x",
                                   "a\x00b", " ", "$(id)", "..\\..\\x"])
def test_case_ids_from_any_value_are_one_safe_folder_name(value: str) -> None:
    text = format_value(value)
    assert "/" not in text and "\\" not in text and "\x00" not in text
    pid = f"v{text}"
    assert POINT_ID.match(pid) and pid not in (".", "..")


def test_case_folders_stay_in_cases_for_hostile_values(tmp_path: Path) -> None:
    values = ["../../escape", "/abs/path", "..", "a/../../b"]
    study = f"""\
title: hostile values
template: tpl
parameters:
  - kind: product
    values: {{v: {json.dumps(values)}}}
steps:
  - name: solve
    run: [sh, solve.sh]
    reads: [solve.sh]
    writes: [out.json]
quantities:
  q: {{from: json, file: out.json, key: q}}
"""
    root = write_study(tmp_path / "s", study, {"solve.sh": "echo '{\"q\": 1}' > out.json\n"})
    run_direct(root)
    cases = root / "cases"
    made = sorted(p.name for p in cases.iterdir())
    assert len(made) == len(values)
    for p in cases.rglob("*"):
        assert cases.resolve() in p.resolve().parents
    assert sorted(p.name for p in tmp_path.iterdir()) == ["s"]  # nothing beside the study


def test_point_id_leaving_the_folder_is_refused(tmp_path: Path) -> None:
    root = _probe_study(tmp_path / "s", "a = {{ a }}\n")
    text = (root / "study.yaml").read_text().replace("id: p1", "id: ../../out")
    (root / "study.yaml").write_text(text)
    with pytest.raises(StudySpecError) as info:
        api.load_study(root)
    assert "parameters[0].points[0].id" in str(info.value) and "'../../out'" in str(info.value)


def _collect_study(root: Path, quantity: str) -> Path:
    study = f"""\
title: collector confinement
template: tpl
parameters:
  - kind: table
    points: [{{id: p1, a: 1}}]
steps:
  - name: solve
    run: [sh, solve.sh]
    reads: [solve.sh]
    writes: [done.txt]
quantities:
  q: {quantity}
"""
    # A hostile solver: it plants a link to a file outside its case folder, then finishes well.
    solve = "ln -s ../../../secret.json leak.json\nln -s ../../.. up\necho ok > done.txt\n"
    return write_study(root, study, {"solve.sh": solve})


@pytest.mark.parametrize("quantity", ["{from: json, file: leak.json, key: q}",
                                      "{from: json, file: up/secret.json, key: q}"])
def test_collector_does_not_follow_links_out_of_the_case(quantity: str, tmp_path: Path) -> None:
    (tmp_path / "secret.json").write_text('{"q": 424242}\n')
    root = _collect_study(tmp_path / "s", quantity)
    run_direct(root)
    assert (root / "cases" / "p1--m0" / "leak.json").read_text()  # the link works on disk...
    res = api.collect(root, write=False).results
    row = res.iloc[0]
    assert row["status"] == "failed" and row["value"] != row["value"]  # ...but is not read (NaN)
    assert "refused" in row["reason"] and "424242" not in row["reason"]


def test_case_folder_that_is_a_link_elsewhere_is_refused(tmp_path: Path) -> None:
    (tmp_path / "secret.json").write_text('{"q": 424242}\n')
    root = _collect_study(tmp_path / "s", "{from: json, file: out.json, key: q}")
    run_direct(root)
    elsewhere = tmp_path / "elsewhere"
    (root / "cases" / "p1--m0").rename(elsewhere)
    (elsewhere / "out.json").write_text('{"q": 424242}\n')
    (root / "cases" / "p1--m0").symlink_to(elsewhere)
    row = api.collect(root, write=False).results.iloc[0]
    assert row["status"] == "failed" and "refused" in row["reason"]
    assert row["value"] != 424242.0


def test_xdmf_heavy_data_outside_the_case_is_refused(tmp_path: Path) -> None:
    root = _collect_study(tmp_path / "s", "{from: field, file: fields.xdmf, array: u, operation: mean}")
    run_direct(root)
    xdmf = """<?xml version="1.0"?><Xdmf Version="3.0"><Domain><Grid Name="g"><Topology TopologyType="Polyvertex"
 NumberOfElements="1"/><Geometry GeometryType="XYZ"><DataItem Dimensions="1 3" Format="HDF">../../../secret.h5:/xyz
 </DataItem></Geometry><Attribute Name="u" Center="Node"><DataItem Dimensions="1" Format="HDF">../../../secret.h5:/u
 </DataItem></Attribute></Grid></Domain></Xdmf>"""
    (root / "cases" / "p1--m0" / "fields.xdmf").write_text(xdmf)
    row = api.collect(root, write=False).results.iloc[0]
    assert row["status"] == "failed" and "refused" in row["reason"] and "secret.h5" in row["reason"]


# --- archives -------------------------------------------------------------------------------------

def test_unpack_refuses_a_target_that_is_a_link(tmp_path: Path) -> None:
    archive = tmp_path / "ok.tar.gz"
    with tarfile.open(archive, "w:gz") as tf:
        info = tarfile.TarInfo("bundle/a.txt")
        info.size = 1
        import io

        tf.addfile(info, io.BytesIO(b"x"))
    (tmp_path / "real").mkdir()
    (tmp_path / "target").symlink_to(tmp_path / "real")
    with pytest.raises(UnsafePathError):
        safe_extract(archive, tmp_path / "target")
    assert list((tmp_path / "real").iterdir()) == []


def test_unpack_refuses_every_bad_member_at_once_and_writes_nothing(tmp_path: Path) -> None:
    """Traversal, absolute names and links together: each is named, nothing is written. (The
    corpus in test_bad_inputs.py has one archive per kind of bad member.)"""
    import io

    archive = tmp_path / "bad.tar"
    with tarfile.open(archive, "w") as tf:
        for name, kind, link in [("b/ok.txt", tarfile.REGTYPE, ""), ("b/../../up.txt", tarfile.REGTYPE, ""),
                                 ("/abs.txt", tarfile.REGTYPE, ""), ("b/l", tarfile.SYMTYPE, "/etc"),
                                 ("b/h", tarfile.LNKTYPE, "b/ok.txt")]:
            info = tarfile.TarInfo(name)
            info.type, info.linkname = kind, link
            info.size = 1 if kind == tarfile.REGTYPE else 0
            tf.addfile(info, io.BytesIO(b"x") if info.size else None)
    with pytest.raises(UnsafePathError) as info:
        safe_extract(archive, tmp_path / "out")
    for name in ("b/../../up.txt", "/abs.txt", "b/l", "b/h"):
        assert repr(name) in str(info.value)
    assert "entry 'b/ok.txt'" not in str(info.value)
    assert not (tmp_path / "out").exists() and not (tmp_path.parent / "up.txt").exists()


# --- no shell anywhere in the package ------------------------------------------------------------

SHELL_FUNCS = {("os", "system"), ("os", "popen"), ("subprocess", "getoutput"), ("subprocess", "getstatusoutput"),
               ("asyncio", "create_subprocess_shell"), ("os", "execl"), ("os", "execlp"), ("pty", "spawn")}
SHELLS = {"sh", "bash", "dash", "zsh", "/bin/sh", "/bin/bash", "cmd", "cmd.exe", "powershell"}


def _dotted(node: ast.AST) -> tuple[str, ...]:
    parts = []
    while isinstance(node, ast.Attribute):
        parts.append(node.attr)
        node = node.value
    if isinstance(node, ast.Name):
        parts.append(node.id)
    return tuple(reversed(parts))


def shell_uses(source: str, filename: str) -> list[str]:
    """Every place in ``source`` that could hand a string to a shell."""
    found = []
    tree = ast.parse(source, filename)
    aliases: dict[str, tuple[str, ...]] = {}
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom) and node.module:
            for a in node.names:
                aliases[a.asname or a.name] = (node.module, a.name)
    for node in ast.walk(tree):
        if not isinstance(node, ast.Call):
            continue
        where = f"{filename}:{node.lineno}"
        for kw in node.keywords:
            if kw.arg == "shell" and not (isinstance(kw.value, ast.Constant) and kw.value.value is False):
                found.append(f"{where}: shell={ast.unparse(kw.value)}")
        name = _dotted(node.func)
        if len(name) == 1 and name[0] in aliases:
            name = aliases[name[0]]
        if name[-2:] in SHELL_FUNCS or (len(name) == 2 and name in SHELL_FUNCS):
            found.append(f"{where}: {'.'.join(name)}()")
        for arg in node.args[:1]:  # ["sh", "-c", ...] is a shell string by another name
            if isinstance(arg, (ast.List, ast.Tuple)) and len(arg.elts) >= 2:
                first, second = arg.elts[0], arg.elts[1]
                if (isinstance(first, ast.Constant) and first.value in SHELLS and isinstance(second, ast.Constant)
                        and second.value in ("-c", "/c", "-Command")):
                    found.append(f"{where}: {first.value} {second.value}")
    return found


def test_the_scanner_finds_every_kind_of_shell_call() -> None:
    """The scanner itself, on code that does each forbidden thing (it must not pass vacuously)."""
    bad = """\
import os, subprocess
from os import system as run_it
subprocess.run(cmd, shell=True)
subprocess.Popen(cmd, shell=flag)
os.system(cmd)
os.popen(cmd)
run_it(cmd)
subprocess.getoutput(cmd)
subprocess.check_call(["sh", "-c", cmd])
subprocess.run(["ls"], shell=False)
"""
    found = shell_uses(bad, "bad.py")
    assert [f.split(":")[1] for f in found] == ["3", "4", "5", "6", "7", "8", "9"], found


def test_no_shell_in_the_package() -> None:
    files = sorted(PACKAGE.rglob("*.py"))
    assert len(files) > 50 and PACKAGE / "workflow" / "runstep.py" in files
    found = []
    for path in files:
        found += shell_uses(path.read_text(encoding="utf-8"), str(path.relative_to(PACKAGE)))
    assert found == []


def test_packaged_rules_have_one_shell_line_and_no_run_blocks() -> None:
    """Snakemake's ``shell:`` goes through bash; the rules may use only the step runner's and the
    batch runner's lines, built by ``RuleSet.shell_command`` and ``RuleSet.batch_command`` from
    quoted and checked pieces, and no ``run:`` block."""
    for smk in sorted((PACKAGE / "workflow" / "rules").glob("*.smk")):
        text = smk.read_text()
        code = [line.split("#")[0] for line in text.splitlines()]
        shells = [line.strip() for line in code if re.match(r"^\s*shell\s*:", line)]
        assert shells in ([], ["shell: _SF.shell_command", "shell: _SF.batch_command"]), (smk, shells)
        assert not any(re.match(r"^\s*run\s*:", line) for line in code), smk
        assert "wildcard_constraints" in text and r'case=r"[A-Za-z0-9][A-Za-z0-9._-]*"' in text
        assert r'batch=r"b[0-9]+"' in text


# --- a reviewer bundle ships nothing from outside the study --------------------------------------

def test_pack_does_not_ship_files_that_links_pull_in_from_outside(tmp_path: Path) -> None:
    """A link a solver planted in its case folder (absolute or relative, leading out of the
    study) must not put the target's bytes into a bundle that goes to a stranger."""
    from relsupport import fault_study

    (tmp_path / "secret.txt").write_text("TOPSECRET-4711\n")
    root = fault_study(tmp_path / "s", {"a": "ok"}, levels=2)
    run_direct(root)
    api.collect(root)
    case = root / "cases" / "a--m0"
    (case / "leak-abs.txt").symlink_to(tmp_path / "secret.txt")
    (case / "leak-rel.txt").symlink_to("../../../secret.txt")
    (case / "inside.txt").symlink_to("out.json")  # a link that stays inside is fine
    result = api.pack(root, str(tmp_path / "bundle.tar.gz"))
    with tarfile.open(tmp_path / "bundle.tar.gz") as tf:
        names = tf.getnames()
        blobs = b"".join(tf.extractfile(m).read() for m in tf.getmembers() if m.isreg())
    assert b"TOPSECRET-4711" not in blobs
    assert not any("leak" in n for n in names)
    skipped = {s["path"].rsplit("/", 1)[-1]: s["why"] for s in result.skipped}
    assert "outside" in skipped["leak-abs.txt"] and "outside" in skipped["leak-rel.txt"]
    assert any(n.endswith("cases/a--m0/inside.txt") for n in names)


# --- the HTML report shows hostile text as text -------------------------------------------------

@pytest.fixture(scope="module")
def hostile_report(tmp_path_factory) -> tuple[Path, object]:
    from relsupport import FAULT_SOLVER

    study = """\
title: "<script>alert('title')</script>"
description: "<img src=x onerror=alert('desc')>"
template: tpl
parameters:
  - kind: table
    points: [{id: p1, a: 1, mode: ok, tag: "<b onmouseover=alert('tag')>x</b>"},
             {id: p2, a: 2, mode: nan, tag: "</td><script>alert(2)</script>"}]
mesh: {levels: 3, ratio: 2, counts: {nx: 4}}
steps:
  - name: solve
    run: [sh, solve.sh, "{{ mode }}"]
    reads: [solve.sh]
    writes: [out.json]
quantities:
  q: {from: json, file: out.json, key: q, unit: "<i>m</i>"}
"""
    root = write_study(tmp_path_factory.mktemp("report") / "s", study, {"solve.sh": FAULT_SOLVER})
    run_direct(root)
    api.collect(root)
    api.assess(root)
    return root, api.report(root, fields=False)


def test_report_escapes_text_from_the_study(hostile_report) -> None:
    """Titles, parameter values and units from a study file from a stranger appear in the report
    as text, never as markup or script (HTML escaping, common practice)."""
    _, result = hostile_report
    html = Path(result.index).read_text()
    for raw in ["<script>alert", "<img src=x", "<b onmouseover", "</td><script>", "<i>m</i>"]:
        assert raw not in html, raw
    assert "&lt;script&gt;alert(" in html  # the title is shown, escaped


def test_markdown_tables_escape_text_from_the_study(hostile_report) -> None:
    """The Markdown exports are pasted into review pages: markup from the study file arrives as
    escaped text there too (HTML escaping, common practice)."""
    _, result = hostile_report
    tables = sorted(Path(result.index).parent.rglob("*.md"))
    assert tables
    text = "\n".join(t.read_text() for t in tables)
    for raw in ["<script>", "<b onmouseover", "<i>m</i>"]:
        assert raw not in text, raw
    assert "&lt;b onmouseover" in text  # the parameter value is kept, escaped


def test_report_counts_a_refused_output_as_failed(hostile_report) -> None:
    root, result = hostile_report
    collected = api.results(root).cases.set_index("case")["status"].value_counts().to_dict()
    assert collected == {"done": 3, "failed": 3}  # q = NaN on every level of p2
    assert result.counts["failed"] == 3
