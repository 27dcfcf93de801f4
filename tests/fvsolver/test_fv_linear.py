"""Sparse LU backends: solutions against numpy's dense LAPACK solve, singular matrices, MUMPS's
reused analysis, the fallback to SuperLU, and the case-file key that picks a backend."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import scipy.sparse as sp
from fv_support import solve_case

from studyflow.fvsolver import config, linear, run
from studyflow.fvsolver.errors import BackendUnavailable, CaseFileError, SingularJacobian
from studyflow.fvsolver.linear import mumps

MUMPS_MISSING = mumps.why_not()
BACKENDS = [pytest.param("superlu"),
            pytest.param("mumps", marks=pytest.mark.skipif(MUMPS_MISSING is not None,
                                                           reason=f"MUMPS: {MUMPS_MISSING}"))]


def _unsymmetric(n: int, seed: int) -> sp.csr_matrix:
    """A sparse, unsymmetric, well-conditioned matrix: a 1D convection-diffusion stencil plus noise."""
    rng = np.random.default_rng(seed)
    a = sp.diags([-1.3 * np.ones(n - 1), 4.0 * np.ones(n), -0.7 * np.ones(n - 1)], [-1, 0, 1], format="lil")
    for _ in range(3 * n):
        i, j = rng.integers(0, n, 2)
        a[i, j] += 0.1 * rng.standard_normal()
    return a.tocsr()


def _saddle(nu: int, npr: int, seed: int) -> sp.csr_matrix:
    """[[K, G], [D, 0]]: a zero diagonal block like the pressure rows of the MAC Jacobian."""
    rng = np.random.default_rng(seed)
    k = _unsymmetric(nu, seed)
    d = sp.lil_matrix((npr, nu))
    for i in range(npr):  # a difference per pressure row, like a discrete divergence
        d[i, 2 * i], d[i, 2 * i + 1] = -1.0, 1.0 + 0.1 * rng.random()
    d = d.tocsr()
    return sp.bmat([[k, d.T], [d, None]], format="csr")


def _factoriser(name: str):
    return linear.BACKENDS[name].Factoriser(None)


@pytest.mark.parametrize("name", BACKENDS)
@pytest.mark.parametrize("matrix", ["unsymmetric", "saddle"])
def test_backend_matches_a_dense_lapack_solve(name, matrix):
    # reference: numpy.linalg.solve (LAPACK dgesv, dense LU with partial pivoting)
    a = _unsymmetric(400, 1) if matrix == "unsymmetric" else _saddle(300, 150, 2)
    b = np.random.default_rng(3).standard_normal(a.shape[0])
    f = _factoriser(name)
    f.factor(a)
    x = f.solve(b)
    f.close()
    ref = np.linalg.solve(a.toarray(), b)
    assert np.max(np.abs(x - ref)) <= 1e-10 * np.max(np.abs(ref))


@pytest.mark.parametrize("name", BACKENDS)
def test_backend_leaves_the_right_hand_side_alone(name):
    a = _unsymmetric(50, 4)
    b = np.arange(50, dtype=float)
    f = _factoriser(name)
    f.factor(a)
    f.solve(b)
    assert np.array_equal(b, np.arange(50, dtype=float))


@pytest.mark.parametrize("name", BACKENDS)
@pytest.mark.parametrize("kind", ["zero row", "repeated row"])
def test_singular_matrix_raises_singular_jacobian(name, kind):
    a = _unsymmetric(60, 5).tolil()
    if kind == "zero row":
        a[10, :] = 0.0
    else:  # integer entries, so the elimination that exposes the dependence is exact
        a[10, :] = 0.0
        a[20, :] = 0.0
        a[10, [3, 7, 30]] = [1.0, 2.0, 3.0]
        a[20, [3, 7, 30]] = [1.0, 2.0, 3.0]
    f = _factoriser(name)
    with pytest.raises(SingularJacobian):
        f.factor(a.tocsr())


@pytest.mark.skipif(MUMPS_MISSING is not None, reason=f"MUMPS: {MUMPS_MISSING}")
def test_mumps_reuses_its_analysis_while_the_pattern_stays():
    a = _saddle(200, 100, 6)
    b = np.ones(a.shape[0])
    f = mumps.Factoriser()
    f.factor(a)
    f.factor(2.0 * a)  # same pattern, new values: numerical factorisation only
    assert f.analyses == 1
    assert np.allclose(f.solve(b), np.linalg.solve(2.0 * a.toarray(), b), rtol=1e-10, atol=1e-12)
    c = a + sp.eye(a.shape[0], format="csr") * 0.5  # fills the zero block's diagonal: a new pattern
    f.factor(c)
    assert f.analyses == 2
    assert np.allclose(f.solve(b), np.linalg.solve(c.toarray(), b), rtol=1e-10, atol=1e-12)
    f.close()


@pytest.mark.skipif(MUMPS_MISSING is not None, reason=f"MUMPS: {MUMPS_MISSING}")
def test_mumps_shim_builds_once_into_an_empty_cache(tmp_path, monkeypatch):
    monkeypatch.setenv("STUDYFLOW_FV_CACHE", str(tmp_path / "cache"))
    built = mumps.build()
    assert built.parent == tmp_path / "cache" and built.name.startswith("mumps_shim-") and built.stat().st_size > 0
    stamp = built.stat().st_mtime_ns
    assert mumps.build() == built and built.stat().st_mtime_ns == stamp  # kept, not rebuilt
    assert not [p for p in built.parent.iterdir() if p.name.startswith(".build-")]  # no half-built files left


def test_shim_name_follows_the_mumps_headers(tmp_path, monkeypatch):
    # the headers fix the layout of MUMPS's control structure: new headers, a new shim
    inc = tmp_path / "inc"
    inc.mkdir()
    (inc / "dmumps_c.h").write_text("/* layout 1 */\n")
    monkeypatch.setenv("STUDYFLOW_FV_MUMPS_FLAGS", f"-I{inc} -ldmumps_seq")
    first = mumps.library_path()
    assert mumps._headers()[0] == inc / "dmumps_c.h"
    (inc / "dmumps_c.h").write_text("/* layout 2 */\n")
    assert mumps.library_path() != first
    (inc / "dmumps_c.h").write_text("/* layout 1 */\n")
    assert mumps.library_path() == first


def test_machine_with_mumps_installed_can_use_it():
    # scripts/setup installs Debian's libmumps-seq-dev; where it is present the backend must work,
    # so a broken shim cannot hide behind the SuperLU fallback
    if not Path("/usr/include/dmumps_c.h").exists():
        pytest.skip("MUMPS is not installed on this machine")
    assert MUMPS_MISSING is None
    assert linear.pick("auto")[0] is mumps


@pytest.fixture
def no_mumps(tmp_path, monkeypatch):
    """MUMPS made unusable for this test: a library that does not exist, an empty cache."""
    monkeypatch.setenv("STUDYFLOW_FV_CACHE", str(tmp_path / "cache"))
    monkeypatch.setenv("STUDYFLOW_FV_MUMPS_FLAGS", "-lstudyflow_fv_no_such_library")
    monkeypatch.setattr(mumps, "_LOADED", {})


def test_auto_falls_back_to_superlu_and_says_why(no_mumps):
    reason = mumps.why_not()
    assert reason and "not found" in reason
    backend, note = linear.pick("auto")
    assert backend is linear.superlu and note.startswith("mumps not used:")
    with pytest.raises(BackendUnavailable, match="mumps cannot be used here"):
        linear.pick("mumps")
    r = solve_case({"case": {"kind": "cavity"}, "mesh": {"nx": 16, "ny": 16}})
    assert r.outcome.status == "converged"
    assert r.metrics["solver"]["linear_solver"] == "superlu"
    assert "not found" in r.metrics["solver"]["linear_solver_note"]


def test_unusable_backend_named_in_the_case_file_is_a_case_file_error(no_mumps):
    cfg = config.parse({"case": {"kind": "cavity"}, "mesh": {"nx": 16, "ny": 16},
                        "solve": {"linear_solver": "mumps"}}, "cavity.toml")
    with pytest.raises(CaseFileError) as err:
        run.solve(cfg, log=lambda s: None)
    text = str(err.value)
    assert "cavity.toml: solve.linear_solver" in text and "(got 'mumps')" in text and "superlu" in text


def test_unknown_backend_name_is_rejected_with_key_and_value():
    with pytest.raises(CaseFileError) as err:
        config.parse({"case": {"kind": "cavity"}, "mesh": {"nx": 16, "ny": 16},
                      "solve": {"linear_solver": "dense"}}, "c.toml")
    assert "c.toml: solve.linear_solver: must be one of auto, mumps, superlu (got 'dense')" in str(err.value)


@pytest.mark.skipif(MUMPS_MISSING is not None, reason=f"MUMPS: {MUMPS_MISSING}")
def test_both_backends_give_the_same_converged_plate():
    # reference: SuperLU as bundled in scipy; both are direct solves of the same Newton systems,
    # so the converged fields may differ only by round-off
    runs = {name: solve_case({"case": {"kind": "plate"}, "mesh": {"nx": 64, "ny": 32},
                              "solve": {"linear_solver": name, "update_tolerance": 1e-10}})
            for name in ("superlu", "mumps")}
    a, b = runs["superlu"], runs["mumps"]
    assert a.metrics["solver"]["linear_solver"] == "superlu" and b.metrics["solver"]["linear_solver"] == "mumps"
    assert a.outcome.status == b.outcome.status == "converged"
    assert a.outcome.iterations == b.outcome.iterations
    for fa, fb in zip(a.fields, b.fields):
        assert np.max(np.abs(fa - fb)) <= 1e-9
    assert abs(a.metrics["drag"]["cd"] - b.metrics["drag"]["cd"]) <= 1e-9 * a.metrics["drag"]["cd"]


def test_command_line_lists_the_backends():
    p = subprocess.run([sys.executable, "-m", "studyflow.fvsolver", "--linear-solvers"], capture_output=True,
                       text=True, timeout=120)
    assert p.returncode == 0, p.stderr
    lines = p.stdout.splitlines()
    assert [ln.split()[0] for ln in lines] == ["mumps", "superlu"]
    assert sum("(auto picks this)" in ln for ln in lines) == 1
    assert lines[1].split()[1] == "usable"
