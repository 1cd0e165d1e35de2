"""Numerical functions generated once per calc from the derived equations.

Parameters are substituted as numbers first, then one function per concern is
generated with common-subexpression elimination (math module, scalar
arguments).  Without constraints, q̈ comes from one generated function of
straight-line scalar code: M and f, then an LDLᵀ factorisation of the
symmetric M without pivoting (M is positive definite; analysis checks it at the
initial state) and the two triangular solves.  For the small systems calcs
hold this is 3 to 5 times faster than filling arrays for np.linalg.solve
(measured in bench/).  Series functions use numpy and take whole time
histories.  Only sympy expressions reach lambdify, never text.
"""

from __future__ import annotations

from typing import Callable

import numpy as np
import sympy as sp

from ..calcfile.expressions import TIME, symbol
from .lagrange import Derivation, diff_ae
from .safe_forms import overflow_safe


def numeric(expr, params: dict[str, float]):
    """`expr` with every parameter replaced by its SI value, in a form that cannot overflow (safe_forms)."""
    return overflow_safe(expr.xreplace({symbol(k): sp.Float(v) for k, v in params.items()}))


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
        replacements, reduced = sp.cse(exprs)
        self._system = sp.lambdify(args, exprs, modules="math", cse=lambda _: (replacements, reduced))
        self._solve = (_acceleration_function(args, replacements, reduced, self.n)
                       if self.m == 0 else None)
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
        if self._solve is not None:
            values = [*np.asarray(q, dtype=float).tolist(), *np.asarray(qd, dtype=float).tolist()]
            return np.array(self._solve(t, *values)), np.zeros(0)
        M, f, G, gamma = self.matrices(t, q, qd)
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
        """y' = [q̇, q̈] for y = [q, q̇]."""
        n = self.n
        if self._solve is not None:
            values = np.asarray(y, dtype=float)[:2 * n].tolist()
            return np.array(values[n:] + self._solve(t, *values))
        qdd, _ = self.accelerations(t, y[:n], y[n:2 * n])
        return np.concatenate([y[n:2 * n], qdd])


class _StraightLine:
    """Assignments of generated straight-line code; each non-trivial value gets a name."""

    def __init__(self, assignments) -> None:
        self.assignments = list(assignments)

    def name(self, value: sp.Expr) -> sp.Expr:
        if value.is_Atom:
            return value
        name = sp.Dummy()
        self.assignments.append((name, value))
        return name


def _ldlt_solution(code: _StraightLine, A, b) -> list:
    """x with A x = b, A symmetric (lower triangle read), by LDLᵀ without pivoting.

    Golub and Van Loan, Matrix Computations, 4th ed., section 4.1.2: D_j =
    A_jj − Σ_k L_jk² D_k and L_ij = (A_ij − Σ_k L_ik L_jk D_k) / D_j (k < j),
    then L z = b, x = L⁻ᵀ D⁻¹ z.  Zero entries vanish as the code is formed.
    """
    n = len(b)
    L, D, inverse_D = {}, [], []
    for j in range(n):
        LD = [code.name(L[j, k] * D[k]) for k in range(j)]
        D.append(code.name(A[j][j] - sp.Add(*[L[j, k] * LD[k] for k in range(j)])))
        inverse_D.append(code.name(1 / D[j]))
        for i in range(j + 1, n):
            L[i, j] = code.name((A[i][j] - sp.Add(*[L[i, k] * LD[k] for k in range(j)]))
                                * inverse_D[j])
    z = []
    for i in range(n):
        z.append(code.name(b[i] - sp.Add(*[L[i, k] * z[k] for k in range(i)])))
    x = [sp.Integer(0)] * n
    for i in reversed(range(n)):
        x[i] = code.name(z[i] * inverse_D[i] - sp.Add(*[L[k, i] * x[k] for k in range(i + 1, n)]))
    return x


def _acceleration_function(args, replacements, reduced, n: int) -> Callable:
    """f(t, *q, *q̇) -> list of q̈ from the CSE form of [M (row-major), f, ...]."""
    code = _StraightLine(replacements)
    A = [[code.name(reduced[i * n + j]) if j <= i else None for j in range(n)] for i in range(n)]
    b = [code.name(e) for e in reduced[n * n:n * n + n]]
    x = _ldlt_solution(code, A, b)
    return sp.lambdify(args, x, modules="math", cse=lambda _: (code.assignments, x))


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
