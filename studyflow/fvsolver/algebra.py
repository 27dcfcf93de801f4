"""Affine expressions over the unknown vector and the quadratic residual they build.

Every discrete term of the steady equations is either affine in the unknowns x (diffusion,
pressure gradient, continuity, boundary rows) or a product of two affine expressions
(convection: face mass flux times face value; the dynamic pressure of a total-pressure inlet).
So the residual has the exact form

    R(x) = L x + c + S [(A x + a) * (B x + b)]

and its exact Jacobian is  J(x) = L + S [diag(A x + a) B + diag(B x + b) A],
which costs a few sparse products per Newton step (Newton's method for a quadratic map).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp


class Lin:
    """An array of affine expressions: entry k is sum_t coef_t[k] * x[idx_t[k]] + const[k].

    An index of -1 stands for "no unknown" (a ghost value known in advance); its coefficient
    is ignored and its value belongs in ``const``.
    """

    __slots__ = ("shape", "terms", "const")

    def __init__(self, shape: tuple[int, ...], terms: list | None = None, const: np.ndarray | None = None):
        self.shape = tuple(shape)
        self.terms = list(terms or [])
        self.const = np.zeros(shape) if const is None else np.broadcast_to(const, shape).astype(float)

    @classmethod
    def pick(cls, idx: np.ndarray, const: np.ndarray | float = 0.0, weight: np.ndarray | float = 1.0) -> "Lin":
        """weight * (x[idx] if idx >= 0 else const)."""
        idx = np.asarray(idx)
        w = np.broadcast_to(np.asarray(weight, dtype=float), idx.shape)
        c = np.broadcast_to(np.asarray(const, dtype=float), idx.shape)
        return cls(idx.shape, [(idx, w.copy())], np.where(idx < 0, c * w, 0.0))

    @classmethod
    def const_(cls, value: np.ndarray) -> "Lin":
        value = np.asarray(value, dtype=float)
        return cls(value.shape, [], value.copy())

    def __add__(self, other: "Lin") -> "Lin":
        return Lin(self.shape, self.terms + other.terms, self.const + other.const)

    def __neg__(self) -> "Lin":
        return self * -1.0

    def __sub__(self, other: "Lin") -> "Lin":
        return self + (-other)

    def __mul__(self, w: np.ndarray | float) -> "Lin":
        w = np.asarray(w, dtype=float)
        return Lin(self.shape, [(i, np.broadcast_to(c * w, self.shape)) for i, c in self.terms], self.const * w)

    __rmul__ = __mul__

    def flat(self, mask: np.ndarray | None = None) -> "Lin":
        """Entries (optionally where ``mask``) as a 1-D expression array."""
        if mask is None:
            mask = np.ones(self.shape, dtype=bool)
        n = int(mask.sum())
        return Lin((n,), [(i[mask], c[mask]) for i, c in self.terms], self.const[mask])

    def matrix(self, rows: np.ndarray, n_rows: int, n_cols: int) -> sp.csr_matrix:
        """Sparse matrix with entry (rows[k], idx_t[k]) += coef_t[k]; ghosts (-1) dropped."""
        r, c, v = [], [], []
        for idx, coef in self.terms:
            keep = (idx >= 0) & (coef != 0.0)
            r.append(rows[keep])
            c.append(idx[keep])
            v.append(coef[keep])
        if not r:
            return sp.csr_matrix((n_rows, n_cols))
        m = sp.coo_matrix((np.concatenate(v), (np.concatenate(r), np.concatenate(c))), shape=(n_rows, n_cols))
        return m.tocsr()


def raw(shape: tuple[int, ...], terms: list[tuple[np.ndarray, np.ndarray]], const: np.ndarray | float = 0.0) -> Lin:
    """Expression from explicit (index, coefficient) arrays."""
    return Lin(shape, [(np.asarray(i), np.broadcast_to(np.asarray(c, dtype=float), shape)) for i, c in terms],
               np.broadcast_to(np.asarray(const, dtype=float), shape))


class Assembly:
    """Collects affine and quadratic contributions to the residual rows."""

    def __init__(self, n: int):
        self.n = n
        self.linear_parts: list[tuple[np.ndarray, Lin]] = []
        self.quad_parts: list[tuple[np.ndarray, Lin, Lin, float]] = []

    def linear(self, rows: np.ndarray, expr: Lin) -> None:
        self.linear_parts.append((np.asarray(rows).ravel(), expr.flat() if expr.const.ndim != 1 else expr))

    def quadratic(self, rows: np.ndarray, flux: Lin, value: Lin, sign: float = 1.0) -> None:
        f = flux.flat() if flux.const.ndim != 1 else flux
        g = value.flat() if value.const.ndim != 1 else value
        self.quad_parts.append((np.asarray(rows).ravel(), f, g, sign))

    def finish(self) -> "QuadraticSystem":
        n = self.n
        mats, c = [], np.zeros(n)
        for rows, expr in self.linear_parts:
            mats.append(expr.matrix(rows, n, n))
            np.add.at(c, rows, expr.const)
        L = sum(mats[1:], mats[0]) if mats else sp.csr_matrix((n, n))
        s_cols, s_rows, s_vals, a_c, b_c = [], [], [], [], []
        offset = 0
        A_list, B_list = [], []
        for rows, f, g, sign in self.quad_parts:
            m = len(rows)
            local = np.arange(m)
            A_list.append(f.matrix(local, m, n))
            B_list.append(g.matrix(local, m, n))
            a_c.append(f.const)
            b_c.append(g.const)
            s_rows.append(rows)
            s_cols.append(offset + local)
            s_vals.append(np.full(m, sign))
            offset += m
        A = sp.vstack(A_list).tocsr()
        B = sp.vstack(B_list).tocsr()
        S = sp.coo_matrix((np.concatenate(s_vals), (np.concatenate(s_rows), np.concatenate(s_cols))),
                          shape=(n, offset)).tocsr()
        return QuadraticSystem(L.tocsr(), c, A, np.concatenate(a_c), B, np.concatenate(b_c), S)


@dataclass(frozen=True)
class QuadraticSystem:
    """R(x) = L x + c + S[(A x + a) * (B x + b)] and its exact Jacobian."""

    L: sp.csr_matrix
    c: np.ndarray
    A: sp.csr_matrix
    a: np.ndarray
    B: sp.csr_matrix
    b: np.ndarray
    S: sp.csr_matrix

    @property
    def n(self) -> int:
        return self.L.shape[0]

    def residual(self, x: np.ndarray) -> np.ndarray:
        return self.L @ x + self.c + self.S @ ((self.A @ x + self.a) * (self.B @ x + self.b))

    def jacobian(self, x: np.ndarray) -> sp.csc_matrix:
        f = self.A @ x + self.a
        g = self.B @ x + self.b
        return (self.L + self.S @ (_row_scale(self.B, f) + _row_scale(self.A, g))).tocsc()


def _row_scale(m: sp.csr_matrix, w: np.ndarray) -> sp.csr_matrix:
    """diag(w) @ m without forming the diagonal matrix."""
    out = m.copy()
    out.data = out.data * np.repeat(w, np.diff(m.indptr))
    return out
