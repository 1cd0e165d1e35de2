"""Static equilibrium: f(q, 0, t=0) + Gᵀλ = 0 with g(q, 0) = 0, found numerically.

Loads are taken as they stand at t = 0.  The search starts from the calc's
initial state.  Stability comes from the stiffness at the solution.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import optimize

from ..errors import AnalysisError
from .codegen import NumericSystem


@dataclass(frozen=True)
class EquilibriumPoint:
    q: np.ndarray
    lambdas: np.ndarray
    residual: float


def find_equilibrium(system: NumericSystem, q0: np.ndarray) -> EquilibriumPoint:
    """Solve for the rest state nearest the start; AnalysisError when none is found."""
    n, m = system.n, system.m
    zero = np.zeros(n)

    def residual(x):
        q, lam = x[:n], x[n:]
        M, f, G, _ = system.matrices(0.0, q, zero)
        force = f + G.T @ lam if m else f
        return np.concatenate([force, system.constraint_values(0.0, q)])

    x0 = np.concatenate([q0, np.zeros(m)])
    scale = max(1.0, float(np.max(np.abs(residual(x0)))))
    best = None
    for method in ("hybr", "lm"):
        with np.errstate(all="ignore"):
            try:
                sol = optimize.root(residual, x0, method=method, tol=1e-14)
            except (ValueError, ArithmeticError, np.linalg.LinAlgError):
                continue
        if not np.all(np.isfinite(sol.x)):
            continue
        err = float(np.max(np.abs(residual(sol.x))))
        if best is None or err < best[1]:
            best = (sol.x, err)
        if err <= 1e-9 * scale:
            break
    if best is None or not best[1] <= 1e-7 * scale:
        left = "no finite solution" if best is None else f"a residual force of {best[1]:.3g} remains"
        raise AnalysisError(f"static equilibrium was not found from the initial state ({left})",
                            key="analysis.equilibrium",
                            fix="start [initial] nearer the rest position, or set "
                                "[analysis] equilibrium = false if the system has none")
    return EquilibriumPoint(q=best[0][:n], lambdas=best[0][n:], residual=best[1])
