"""Fuzzing with hypothesis: the study-file loader, the CSV reader of ``assess-csv`` and the
numerical functions. No input may end in anything but a studyflow error (a ``StudyflowError``
subclass, which the command line turns into a message and an exit code).

Example counts are kept small so the file runs in about twenty seconds; raise them locally with
``--hypothesis-profile=reliability-long`` to search longer.
"""

from __future__ import annotations

import contextlib
import io
import math
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import yaml
from hypothesis import HealthCheck, example, given, settings
from hypothesis import strategies as st
from hypothesis.extra import numpy as hnp

from studyflow import api
from studyflow.analysis import (
    apparent_order,
    assess,
    fit_power_law,
    least_squares_uncertainty,
    representative_size,
    three_level,
    two_level,
)
from studyflow.cli import main
from studyflow.errors import EXIT_ANALYSIS, EXIT_INVALID_INPUT, EXIT_OK, StudyflowError

settings.register_profile("reliability-long", max_examples=2000, deadline=None)
FEW = settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture,
                                                                      HealthCheck.too_slow])

# --- the study-file loader ---------------------------------------------------------------------------

BASE = {
    "title": "fuzzed study",
    "template": "tpl",
    "constants": {"solver": "sh"},
    "parameters": [{"kind": "product", "values": {"a": [1, 2]}},
                   {"kind": "table", "points": [{"id": "p", "a": 3}]}],
    "mesh": {"levels": 2, "ratio": 2, "counts": {"nx": 4}},
    "steps": [{"name": "solve", "run": "{{ solver }} solve.sh", "reads": ["solve.sh"], "writes": ["out.json"]}],
    "quantities": {"q": {"from": "json", "file": "out.json", "key": "q"},
                   "r": {"from": "log", "file": "logs/solve.log", "pattern": "r = (\\S+)", "series": True}},
    "iteration": {"residuals": ["r"], "tolerance": 1.0e-6},
    "resources": {"cores": 1, "time_min": 1},
}

scalars = st.one_of(st.none(), st.booleans(), st.integers(-1000, 1000), st.floats(allow_nan=True),
                    st.text(max_size=12), st.sampled_from(["..", "/etc/passwd", "{{ x }}", "{% if %}", "-", "product",
                                                           "lhs", "table", "json", "out.json", "a", "1e400"]))
values = st.recursive(scalars, lambda inner: st.one_of(st.lists(inner, max_size=4),
                                                       st.dictionaries(st.text(max_size=6), inner, max_size=4)),
                      max_leaves=12)


def _paths(doc, prefix=()):
    yield prefix
    if isinstance(doc, dict):
        for k, v in doc.items():
            yield from _paths(v, prefix + (k,))
    elif isinstance(doc, list):
        for i, v in enumerate(doc):
            yield from _paths(v, prefix + (i,))


ALL_PATHS = [p for p in _paths(BASE) if p]


def _mutate(doc, path, new, delete):
    import copy

    doc = copy.deepcopy(doc)
    node = doc
    for part in path[:-1]:
        node = node[part]
    if delete and isinstance(node, dict):
        del node[path[-1]]
    else:
        node[path[-1]] = new
    return doc


@pytest.fixture(scope="module")
def study_dir(tmp_path_factory) -> Path:
    root = tmp_path_factory.mktemp("fuzz")
    (root / "tpl").mkdir()
    (root / "tpl" / "solve.sh").write_text("echo '{\"q\": {{ a }}}' > out.json\n")
    return root


def _load_only_studyflow_errors(root: Path) -> None:
    try:
        study = api.load_study(root)
    except StudyflowError:
        return
    # A study that loads must also give its case table and plan (in memory) or a studyflow error.
    try:
        api.design(study)
        api.plan(study)
    except StudyflowError:
        pass


@FEW
@given(mutations=st.lists(st.tuples(st.sampled_from(ALL_PATHS), values, st.booleans()), min_size=1, max_size=3))
@example(mutations=[(("iteration", "residuals", 0), [], False)])  # once a TypeError in the checks
def test_loader_on_mutated_study_files(study_dir: Path, mutations) -> None:
    doc = BASE
    for path, new, delete in mutations:
        try:
            doc = _mutate(doc, path, new, delete)
        except (KeyError, IndexError, TypeError):  # an earlier mutation removed that path
            continue
    try:
        text = yaml.safe_dump(doc, allow_unicode=True)
    except yaml.YAMLError:
        return
    (study_dir / "study.yaml").write_text(text, encoding="utf-8")
    _load_only_studyflow_errors(study_dir)


@FEW
@given(text=st.one_of(st.text(max_size=300),
                      st.lists(st.sampled_from(["title: x", "template: tpl", "steps:", "  - name: s", "    run: [sh]",
                                                "parameters:", "  - kind: zip", "    values: {a: [1]}", "mesh:",
                                                "  levels: 2", "  ratio: [2]", "  list: []", "quantities:",
                                                "  q: {from: json}", "\t", "- ", ": :", "&a [*a]", "!!python/object:os.system",
                                                "? complex", "%YAML 1.1", "---", "...", "{", "'"]),
                               max_size=12).map("\n".join)))
@example(text="&a [*a]")  # an anchor that contains itself: once an endless recursion
@example(text="a: \x1f")  # a control character: once a ReaderError outside the loader's try
@example(text="[" * 1200)
def test_loader_on_arbitrary_text(study_dir: Path, text: str) -> None:
    (study_dir / "study.yaml").write_text(text, encoding="utf-8", errors="surrogatepass")
    _load_only_studyflow_errors(study_dir)


@FEW
@given(data=st.binary(max_size=200))
@example(data=b"\x00")
def test_loader_on_arbitrary_bytes(study_dir: Path, data: bytes) -> None:
    (study_dir / "study.yaml").write_bytes(data)
    _load_only_studyflow_errors(study_dir)


def test_loader_refuses_aliases_of_aliases_quickly(study_dir: Path) -> None:
    """Nine levels of ten aliases each would expand to 10^9 values ("a billion laughs", a known
    attack on YAML readers, common practice to test)."""
    import time

    lines = ["a0: &a0 [x, x, x, x, x, x, x, x, x, x]"]
    lines += [f"a{i}: &a{i} [" + ", ".join([f"*a{i - 1}"] * 10) + "]" for i in range(1, 10)]
    (study_dir / "study.yaml").write_text("\n".join(lines) + "\n")
    start = time.monotonic()
    with pytest.raises(StudyflowError) as info:
        api.load_study(study_dir)
    assert time.monotonic() - start < 30
    assert "study.yaml" in str(info.value) and "more values than allowed" in str(info.value)


# --- the CSV reader of assess-csv ------------------------------------------------------------------

cells = st.one_of(st.floats(allow_nan=True, allow_infinity=True).map(repr), st.integers(-5, 10**6).map(str),
                  st.sampled_from(["", " ", "nan", "inf", "-inf", "abc", '"1,5"', "1e-300", "1e308", "0", "-0.0",
                                   "  2.5 ", "0x10", "1_000", "NaN", "None"]))
headers = st.lists(st.sampled_from(["h", "cells", "value", "drag", "grid", "quantity", "Re", "", " h", "value "]),
                   min_size=1, max_size=4)


@st.composite
def csv_tables(draw) -> str:
    header = draw(headers)
    width = st.integers(max(1, len(header) - 1), len(header) + 1)
    rows = draw(st.lists(width.flatmap(lambda n: st.lists(cells, min_size=n, max_size=n)), max_size=6))
    sep = draw(st.sampled_from([",", ";", "\t"]))
    return "\n".join([sep.join(header)] + [sep.join(r) for r in rows]) + draw(st.sampled_from(["", "\n", "\n\n"]))


def _assess_csv(path: Path, *extra: str) -> int:
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err), warnings.catch_warnings():
        warnings.simplefilter("ignore")
        code = main(["assess-csv", str(path), *extra])
    assert "Traceback" not in err.getvalue()
    return code


@FEW
@given(text=csv_tables(), dim=st.sampled_from([None, "1", "2", "3"]))
def test_assess_csv_on_generated_tables(tmp_path_factory, text: str, dim) -> None:
    path = tmp_path_factory.mktemp("csv") / "levels.csv"
    path.write_text(text)
    extra = ["--dim", dim] if dim else []
    # Only the documented exit codes; anything else (an unhandled exception) fails the test.
    assert _assess_csv(path, *extra) in (EXIT_OK, EXIT_INVALID_INPUT, EXIT_ANALYSIS)


@FEW
@given(data=st.binary(max_size=300))
def test_assess_csv_on_arbitrary_bytes(tmp_path_factory, data: bytes) -> None:
    path = tmp_path_factory.mktemp("csv") / "levels.csv"
    path.write_bytes(data)
    assert _assess_csv(path) in (EXIT_OK, EXIT_INVALID_INPUT, EXIT_ANALYSIS)


# --- the numerical functions ----------------------------------------------------------------------

finite = st.floats(-1e12, 1e12, allow_nan=False, allow_infinity=False)
sizes = st.floats(1e-8, 1e3, allow_nan=False)


def _arrays(levels: int):
    shape = st.integers(1, 5).map(lambda g: (g, levels))
    return shape.flatmap(lambda s: st.tuples(hnp.arrays(np.float64, s, elements=sizes, unique=True),
                                             hnp.arrays(np.float64, s, elements=finite)))


@FEW
@given(hp=st.integers(3, 6).flatmap(_arrays))
def test_three_level_on_any_finite_data(hp) -> None:
    h, phi = hp
    r = three_level(h, phi)
    assert r.order.shape == (h.shape[0],) and r.U.shape == (h.shape[0],)
    assert all(np.asarray(x).dtype == np.float64 for x in (r.order, r.U, r.gci_fine, r.extrapolated))
    # Where an order was found it is positive and the data's sign pattern allowed it.
    ok = np.isfinite(r.order)
    assert (r.order[ok] > 0).all()


@FEW
@given(hp=st.integers(2, 6).flatmap(_arrays), p=st.floats(0.5, 4.0))
def test_two_level_on_any_finite_data(hp, p: float) -> None:
    h, phi = hp
    r = two_level(h, phi, p)
    assert r.U.shape == (h.shape[0],)
    assert (r.U[np.isfinite(r.U)] >= 0).all()


@settings(FEW, max_examples=15)  # each example fits a 160-point grid of orders
@given(hp=st.integers(4, 7).flatmap(_arrays), weighted=st.booleans())  # the fit needs four levels
def test_least_squares_on_any_finite_data(hp, weighted: bool) -> None:
    h, phi = hp
    r = least_squares_uncertainty(h, phi, weighted=weighted)
    assert r.U.shape == (h.shape[0],)
    assert (r.U[np.isfinite(r.U)] >= 0).all()
    fit = fit_power_law(h, phi)
    assert np.asarray(fit.order).shape == (h.shape[0],)


@FEW
@given(e=hnp.arrays(np.float64, st.integers(1, 6).map(lambda n: (4, n)), elements=finite),
       r=st.tuples(st.floats(1.01, 8.0), st.floats(1.01, 8.0)))
def test_apparent_order_on_any_differences(e, r) -> None:
    out = apparent_order(e[0], e[1], np.full(e.shape[1], r[0]), np.full(e.shape[1], r[1]))
    assert out.order.shape == (e.shape[1],)
    got = out.order[np.isfinite(out.order)]
    assert (got > 0).all()


@FEW
@given(cells=hnp.arrays(np.float64, st.integers(1, 6), elements=st.floats(1.0, 1e9)), dim=st.sampled_from([1, 2, 3]),
       measure=st.floats(1e-6, 1e6))
def test_representative_size(cells, dim: int, measure: float) -> None:
    h = representative_size(cells, measure, dim)
    # h = (V / N)^(1/d) (Celik et al. 2008, Eq. (1), from memory)
    assert np.allclose(h, (measure / cells) ** (1.0 / dim), rtol=1e-12)


tidy_rows = st.lists(st.fixed_dictionaries({
    "point": st.sampled_from(["a", "b"]), "quantity": st.sampled_from(["q", "r"]),
    "level": st.integers(0, 4), "h": st.one_of(sizes, st.sampled_from([0.0, -1.0, math.nan, math.inf])),
    "value": st.one_of(finite, st.sampled_from([math.nan, math.inf])),
    "kind": st.sampled_from(["scalar", "scalar", "profile", "history"]),
    "coord": st.sampled_from([math.nan, 0.5, 1.0]), "status": st.sampled_from(["done", "done", "failed"]),
}), max_size=14)


@FEW
@given(rows=tidy_rows, strict=st.booleans(), order=st.floats(0.5, 3.0))
def test_assess_table_on_any_rows(rows, strict: bool, order: float) -> None:
    frame = pd.DataFrame(rows, columns=["point", "quantity", "level", "h", "value", "kind", "coord", "status"])
    try:
        table = assess(frame, None, order, strict=strict)
    except StudyflowError:
        return
    assert isinstance(table, pd.DataFrame)


# --- the collectors, on whatever a solver writes -----------------------------------------------------

COLLECTORS = {
    "out.json": [{"from": "json", "key": "a.b"}, {"from": "json", "key": "a.list", "coord_key": "a.x"},
                 {"from": "json", "key": "a.list", "series": True}],
    "out.yaml": [{"from": "yaml", "key": "a.b"}],
    "out.toml": [{"from": "toml", "key": "a.b"}],
    "out.csv": [{"from": "csv", "column": "u", "row": 1}, {"from": "csv", "column": 1, "series": True},
                {"from": "csv", "column": "u", "coord_column": "x"}, {"from": "csv", "column": "u", "where": {"x": 0.5}}],
    "solve.log": [{"from": "log", "pattern": r"r = (\S+)", "series": True},
                  {"from": "log", "pattern": r"it (?P<it>\d+) r = (?P<value>\S+)", "iteration_group": "it", "series": True},
                  {"from": "log", "pattern": r"CL = (\S+)", "match": "first"}],
}
BOUND = []


def _bound():
    if not BOUND:
        from studyflow.collect.check import bind
        from studyflow.spec.quantities import QuantitySpec

        specs = {f"q{i}_{j}": QuantitySpec.model_validate({**opts, "file": file})
                 for i, (file, options) in enumerate(COLLECTORS.items()) for j, opts in enumerate(options)}
        bound, problems = bind(specs)
        assert not problems, problems
        BOUND.extend(bound.values())
    return BOUND


solver_text = st.one_of(
    st.text(max_size=200),
    st.lists(st.sampled_from(['{"a": {"b": 1.5, "list": [1, 2], "x": [0, 1]}}', '{"a": {"b": "NaN"}}', "{", "a:\n  b: 2",
                              "[a]\nb = 3", "x,u\n0.5,1\n1.0,2", "x,u\n0.5", "u\n1e999", "r = 1e-3", "it 3 r = 0.1",
                              "CL = nan", "CL = 1,5", "r = -", "\x00", ",,,", '"']), max_size=6).map("\n".join))


@FEW
@given(text=solver_text)
def test_collectors_never_raise_on_solver_output(tmp_path_factory, text: str) -> None:
    """A collector turns any output into a value or a failure with a reason; it never raises."""
    from studyflow.collect import read_quantity

    folder = tmp_path_factory.mktemp("case")
    for name in COLLECTORS:
        (folder / name).write_text(text, encoding="utf-8", errors="surrogateescape")
    for b in _bound():
        got = read_quantity(folder, b)
        assert got.status in ("ok", "failed")
        if got.status == "failed":
            assert b.spec.file in got.reason  # the reason names the file
        else:
            assert np.isfinite(got.reading.values).all()
