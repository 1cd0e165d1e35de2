"""Numerical functions generated once per calc from the derived equations.

Parameters are substituted as numbers first, then one function per concern is
generated with common-subexpression elimination.  The right-hand side returns
a flat list (math module, scalar arguments): measured fastest for the small
systems calcs hold (see bench/).  Series functions use numpy and take whole
time histories.  Only sympy expressions reach lambdify, never text.
"""

from __future__ import annotations

from typing import Callable

import numpy as np
import sympy as sp

from ..calcfile.expressions import TIME, symbol
from .lagrange import Derivation, diff_ae


def numeric(expr, params: dict[str, float]):
    """`expr` with every parameter replaced by its SI value."""
    return expr.xreplace({symbol(k): sp.Float(v) for k, v in params.items()})


class NumericSystem:
    """M(q,t) q̈ = f(q, q̇, t) + Gᵀλ,  G q̈ = γ, evaluated numerically.

    State vector y = [q, q̇] (SI).  `accelerations` solves for q̈ and λ.
    """

    def __init__(self, derivation: Derivation, params: dict[str, float]) -> None:
        self.derivation = derivation
        self.params = params
        self.n = len(derivation.q)
        self.m = len(derivation.lambdas)
        args = [TIME, *derivation.q, *derivation.qd]
        exprs = [numeric(e, params) for e in (*derivation.M, *derivation.f,
                                               *derivation.G, *derivation.gamma)]
        self._system = sp.lambdify(args, exprs, modules="math", cse=True)
        self._constraint = sp.lambdify([TIME, *derivation.q],
                                       [numeric(e, params) for e in derivation.g], modules="math", cse=True)
        self._constraint_t = sp.lambdify([TIME, *derivation.q],
                                         [numeric(diff_ae(e, TIME), params) for e in derivation.g],
                                         modules="math", cse=True)

    def matrices(self, t: float, q, qd):
        """M (n×n), f (n), G (m×n), γ (m) at one state."""
        n, m = self.n, self.m
        flat = self._system(t, *q, *qd)
        M = np.array(flat[:n * n], dtype=float).reshape(n, n)
        f = np.array(flat[n * n:n * n + n], dtype=float)
        G = np.array(flat[n * n + n:n * n + n + m * n], dtype=float).reshape(m, n)
        gamma = np.array(flat[n * n + n + m * n:], dtype=float)
        return M, f, G, gamma

    def accelerations(self, t: float, q, qd) -> tuple[np.ndarray, np.ndarray]:
        """q̈ and λ at one state."""
        M, f, G, gamma = self.matrices(t, q, qd)
        if self.m == 0:
            if self.n == 1:
                return np.array([f[0] / M[0, 0]]), np.zeros(0)
            return np.linalg.solve(M, f), np.zeros(0)
        n, m = self.n, self.m
        A = np.zeros((n + m, n + m))
        A[:n, :n] = M
        A[:n, n:] = -G.T
        A[n:, :n] = G
        solution = np.linalg.solve(A, np.concatenate([f, gamma]))
        return solution[:n], solution[n:]

    def constraint_values(self, t: float, q) -> np.ndarray:
        return np.array(self._constraint(t, *q), dtype=float) if self.m else np.zeros(0)

    def constraint_rate(self, t: float, q, qd) -> np.ndarray:
        """dg/dt = G q̇ + ∂g/∂t."""
        if not self.m:
            return np.zeros(0)
        _, _, G, _ = self.matrices(t, q, qd)
        return G @ np.asarray(qd) + np.array(self._constraint_t(t, *q), dtype=float)

    def rhs(self, t: float, y) -> np.ndarray:
        n = self.n
        qdd, _ = self.accelerations(t, y[:n], y[n:2 * n])
        return np.concatenate([y[n:2 * n], qdd])


def series_function(expr, derivation: Derivation, params: dict[str, float]) -> Callable:
    """Vectorised f(t, Q, QD, QDD, LAM) of an expression along a history.

    Q, QD, QDD are (n, N) arrays, LAM is (m, N), t is (N,).  Returns (N,).
    """
    d = derivation
    args = [TIME, *d.q, *d.qd, *d.qdd, *d.lambdas]
    fn = sp.lambdify(args, numeric(expr, params), modules="numpy", cse=True)

    def evaluate(t, Q, QD, QDD, LAM):
        value = fn(t, *Q, *QD, *QDD, *LAM)
        return np.broadcast_to(np.asarray(value, dtype=float), np.shape(t)).copy()

    return evaluate
