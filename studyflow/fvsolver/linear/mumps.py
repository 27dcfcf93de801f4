"""MUMPS (sequential) through ctypes and the small C shim beside this file.

MUMPS is a multifrontal sparse direct solver (CeCILL-C licence): it eliminates the unknowns in
dense frontal matrices with level-3 BLAS, which on the solver's Jacobians is several times faster
than SuperLU's supernodal left-looking LU (measured on the 256 x 128 plate's 98,688 unknowns:
0.3-0.4 s against 1.8-2.2 s for one factorisation, with an optimised BLAS).

The shim (``mumps_shim.c``) is compiled on first use with the system's C compiler against the
system's sequential MUMPS (Debian and Ubuntu: ``apt-get install libmumps-seq-dev``) and kept in
a per-user cache, named by a digest of its source, flags and the MUMPS headers it was compiled
against, so it is rebuilt when any of them changes. ``STUDYFLOW_FV_MUMPS_FLAGS`` replaces the
default compile and link flags for a MUMPS installed elsewhere (for example ``-I/opt/mumps/include -L/opt/mumps/lib -ldmumps_seq ...``);
``STUDYFLOW_FV_CACHE`` moves the cache; ``CC`` picks the compiler.

Settings (MUMPS's ICNTL numbers): ordering ICNTL(7) = 2, approximate minimum fill (measured on
the plate: the same factor time as AMD, a faster analysis than the METIS / SCOTCH choice of the
automatic setting); working-space margin ICNTL(14) = 40 %, doubled and the factorisation
repeated when MUMPS reports that its working space ran out; null-pivot detection ICNTL(24) = 1,
because with its default scaling MUMPS otherwise factorises an exactly singular matrix (two equal
rows) without complaint, and a singular Jacobian must stop the run as singular.
"""

from __future__ import annotations

import ctypes
import hashlib
import os
import shlex
import subprocess
import sys
import tempfile
from pathlib import Path

import numpy as np
import scipy.sparse as sp

from ..errors import BackendUnavailable, LinearSolverError, SingularJacobian

NAME = "mumps"
SHIM = Path(__file__).with_name("mumps_shim.c")
DEFAULT_FLAGS = "-ldmumps_seq -lmumps_common_seq -lmpiseq_seq"
HEADERS = ("dmumps_c.h", "mumps_c_types.h", "mumps_int_def.h")
ORDERING = 2  # ICNTL(7): approximate minimum fill
WORKSPACE_MARGIN = 40  # ICNTL(14), per cent
MAX_MARGIN = 640

# INFOG(1) values (MUMPS users' guide, "Error diagnostics"): the matrix is singular
# (-10 numerically, -6 structurally) ...
_SINGULAR = {-6, -10}
# ... or the working space MUMPS estimated at analysis ran out (retried with a larger margin)
_WORKSPACE = {-8, -9, -14, -15, -17, -20}

_P = ctypes.c_void_p


def cache_dir() -> Path:
    base = os.environ.get("STUDYFLOW_FV_CACHE")
    if base:
        return Path(base)
    xdg = os.environ.get("XDG_CACHE_HOME")
    return (Path(xdg) if xdg else Path.home() / ".cache") / "studyflow-fv"


def _cc() -> str:
    return os.environ.get("CC", "cc")


def _flags() -> list[str]:
    return shlex.split(os.environ.get("STUDYFLOW_FV_MUMPS_FLAGS", DEFAULT_FLAGS))


def _headers() -> list[Path]:
    """MUMPS's C headers as the compiler would find them (the -I folders of the flags first)."""
    dirs = [Path(f[2:]) for f in _flags() if f.startswith("-I") and len(f) > 2]
    dirs += [Path("/usr/local/include"), Path("/usr/include")]
    found = []
    for name in HEADERS:
        hit = next((d / name for d in dirs if (d / name).is_file()), None)
        if hit is not None:
            found.append(hit)
    return found


def library_path() -> Path:
    """Where the compiled shim for the current source, flags and MUMPS headers lives (it may not
    exist yet). The headers fix the layout of MUMPS's control structure: a MUMPS upgrade that
    changes them gets a new shim rather than one built for another layout."""
    h = hashlib.sha256(SHIM.read_bytes())
    h.update("\0".join([_cc(), *_flags(), sys.platform]).encode())
    for header in _headers():
        h.update(header.read_bytes())
    return cache_dir() / f"mumps_shim-{h.hexdigest()[:12]}.so"


def build() -> Path:
    """Compile the shim into the cache if it is not there; raise ``BackendUnavailable`` on failure."""
    target = library_path()
    if target.exists():
        return target
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise BackendUnavailable(f"cannot create the cache folder {target.parent}: {exc.strerror}") from exc
    cc = _cc()
    # concurrent first runs (several cases at once) each compile to their own file; the last
    # rename wins and every one of them is a complete library
    fd, tmp = tempfile.mkstemp(prefix=".build-", suffix=".so", dir=target.parent)
    os.close(fd)
    # -z defs: a library missing from the flags fails here, with a message, not at load time
    strict = ["-Wl,-z,defs"] if sys.platform.startswith("linux") else []
    cmd = [cc, "-O2", "-shared", "-fPIC", *strict, "-o", tmp, str(SHIM), *_flags()]
    try:
        p = subprocess.run(cmd, capture_output=True, text=True, timeout=120)
    except (OSError, subprocess.TimeoutExpired) as exc:
        Path(tmp).unlink(missing_ok=True)
        raise BackendUnavailable(f"no working C compiler ({cc}): {exc}") from exc
    if p.returncode != 0:
        Path(tmp).unlink(missing_ok=True)
        text = p.stderr.strip()
        if "dmumps_c.h" in text:
            hint = "MUMPS headers not found (Debian/Ubuntu: apt-get install libmumps-seq-dev)"
        elif "cannot find -l" in text:
            hint = "MUMPS libraries not found (Debian/Ubuntu: apt-get install libmumps-seq-dev)"
        else:
            hint = "compiling the MUMPS shim failed: " + (text.splitlines()[0] if text else f"exit {p.returncode}")
        raise BackendUnavailable(hint)
    os.replace(tmp, target)
    return target


_LOADED: dict[str, object] = {}  # "lib" once loaded, or "why" it cannot be, for this process


def _library() -> ctypes.CDLL:
    if "lib" in _LOADED:
        return _LOADED["lib"]
    if "why" in _LOADED:
        raise BackendUnavailable(str(_LOADED["why"]))
    try:
        path = build()
        try:
            lib = ctypes.CDLL(str(path))
        except OSError as exc:
            raise BackendUnavailable(f"cannot load {path}: {exc}") from exc
    except BackendUnavailable as exc:
        _LOADED["why"] = str(exc)
        raise
    lib.sf_new.restype = _P
    lib.sf_new.argtypes = [_P]
    lib.sf_set.argtypes = [_P, ctypes.c_int, ctypes.c_int]
    lib.sf_analyse.argtypes = [_P, ctypes.c_int, ctypes.c_longlong, _P, _P, _P, _P]
    lib.sf_factor.argtypes = [_P, _P, _P]
    lib.sf_solve.argtypes = [_P, _P, _P]
    lib.sf_free.argtypes = [_P]
    _LOADED["lib"] = lib
    return lib


def why_not() -> str | None:
    try:
        _library()
    except BackendUnavailable as exc:
        return str(exc)
    return None


def _check(info: np.ndarray, what: str) -> None:
    code, detail = int(info[0]), int(info[1])
    if code >= 0:
        return
    if code in _SINGULAR:
        raise SingularJacobian(f"MUMPS {what}: matrix is singular (INFOG(1) = {code}, INFOG(2) = {detail})")
    raise LinearSolverError(f"MUMPS {what} failed: INFOG(1) = {code}, INFOG(2) = {detail}")


class Factoriser:
    """One MUMPS instance; keeps the analysis for as long as the sparsity pattern stays the same."""

    def __init__(self, order: np.ndarray | None = None):
        del order  # MUMPS orders the unknowns itself
        self._lib = _library()
        self._info = np.zeros(3, dtype=np.intc)
        self._handle = self._lib.sf_new(self._info.ctypes.data)
        if not self._handle:
            raise LinearSolverError("MUMPS: out of memory starting an instance")
        _check(self._info, "start")
        self._lib.sf_set(self._handle, 7, ORDERING)
        self._lib.sf_set(self._handle, 24, 1)
        self._margin = WORKSPACE_MARGIN
        self._pattern: tuple[np.ndarray, np.ndarray] | None = None  # indptr, indices of the analysed matrix
        # MUMPS keeps pointers to these arrays between calls: they live as long as the instance
        self._irn = self._jcn = self._a = None
        self.analyses = 0

    def factor(self, jacobian: sp.spmatrix) -> None:
        a = sp.csr_matrix(jacobian)
        a.sum_duplicates()
        # equal indptr arrays also mean an equal order n
        same = (self._pattern is not None and np.array_equal(a.indptr, self._pattern[0])
                and np.array_equal(a.indices, self._pattern[1]))
        self._a = np.ascontiguousarray(a.data, dtype=np.float64)
        if not same:
            n = a.shape[0]
            self._pattern = (a.indptr.copy(), a.indices.copy())
            self._irn = (np.repeat(np.arange(n, dtype=np.intc), np.diff(a.indptr)) + 1).astype(np.intc)
            self._jcn = (a.indices + 1).astype(np.intc)
            self._lib.sf_analyse(self._handle, n, len(self._a), self._irn.ctypes.data, self._jcn.ctypes.data,
                                 self._a.ctypes.data, self._info.ctypes.data)
            _check(self._info, "analysis")
            self.analyses += 1
        while True:
            self._lib.sf_set(self._handle, 14, self._margin)
            self._lib.sf_factor(self._handle, self._a.ctypes.data, self._info.ctypes.data)
            if int(self._info[0]) in _WORKSPACE and self._margin < MAX_MARGIN:
                self._margin *= 2
                continue
            _check(self._info, "factorisation")
            if int(self._info[2]) > 0:
                raise SingularJacobian(f"MUMPS factorisation: {int(self._info[2])} null pivot(s), the matrix is "
                                       "singular (INFOG(28))")
            return

    def solve(self, b: np.ndarray) -> np.ndarray:
        x = np.array(b, dtype=np.float64, copy=True, order="C")  # MUMPS overwrites the right-hand side
        self._lib.sf_solve(self._handle, x.ctypes.data, self._info.ctypes.data)
        _check(self._info, "solve")
        return x

    def close(self) -> None:
        if self._handle:
            self._lib.sf_free(self._handle)
            self._handle = None

    def __del__(self) -> None:  # a run that stops on an exception still frees MUMPS's memory
        try:
            self.close()
        except Exception:
            pass
