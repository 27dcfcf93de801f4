"""Sparse LU backends for the Newton steps: a registry of small factorisers, one chosen per run.

Each backend module has ``NAME``, ``why_not() -> str | None`` (None when it is usable here,
otherwise the reason) and ``Factoriser(order)`` with ``factor(J)``, ``solve(b)`` and ``close()``;
``order`` is a fill-reducing hint (a permutation of the unknowns) that a backend may ignore. A
failed factorisation raises ``SingularJacobian``.

- ``mumps``: MUMPS, a multifrontal sparse direct solver (dense frontal matrices, level-3 BLAS),
  through a small C shim compiled on first use against the system's sequential MUMPS library.
  The ordering and symbolic analysis of a mesh is done once and reused by every later
  factorisation with the same sparsity pattern.
- ``superlu``: SuperLU as bundled in scipy (``scipy.sparse.linalg.splu``); always available.

``auto`` takes the first usable backend in that order. Both are direct solvers with threshold
partial pivoting, so a converged solution differs between them only at round-off level.
"""

from __future__ import annotations

from types import ModuleType

from ..errors import BackendUnavailable
from . import mumps, superlu

BACKENDS: dict[str, ModuleType] = {m.NAME: m for m in (mumps, superlu)}
CHOICES = ("auto", *BACKENDS)


def pick(name: str) -> tuple[ModuleType, str]:
    """The backend module for ``name`` (``auto`` or a backend name) and a note on the choice.

    The note is empty unless ``auto`` passed over a faster backend; it says which and why.
    Raises ``BackendUnavailable`` when a named backend cannot be used here, ``KeyError`` for
    an unknown name (the case file's validation keeps those out).
    """
    if name != "auto":
        backend = BACKENDS[name]
        reason = backend.why_not()
        if reason:
            raise BackendUnavailable(f"{name} cannot be used here: {reason}")
        return backend, ""
    skipped = []
    for backend in BACKENDS.values():
        reason = backend.why_not()
        if reason is None:
            return backend, "; ".join(skipped)
        skipped.append(f"{backend.NAME} not used: {reason}")
    raise BackendUnavailable("; ".join(skipped))  # superlu is always usable: not reached


def survey() -> dict[str, str | None]:
    """Each backend's name and why it cannot be used here (None: usable)."""
    return {name: backend.why_not() for name, backend in BACKENDS.items()}
