"""Energy audit with the energy function h = Σ q̇ ∂L/∂q̇ − L (Jacobi integral).

Balance: dh/dt = −∂L/∂t − q̇·∂R/∂q̇ + Q·q̇ + λᵀG q̇.  The residual
h(t) − h(0) + W_d(t) − W_in(t) is normalised by the largest energy scale of the
run (peak T, range of V and of h, total dissipated and input work).  h equals
T + V only for natural systems; a rheonomic system is audited on h.
"""

from __future__ import annotations

import numpy as np
import sympy as sp

from ..model import EnergyAudit
from .codegen import numeric, series_function
from .lagrange import Derivation


def audit(derivation: Derivation, params: dict[str, float], t, Q, QD, QDD, LAM,
          dissipated, work_in, tolerance: float) -> EnergyAudit:
    d = derivation
    args = (t, Q, QD, QDD, LAM)
    h = series_function(d.energy_function, d, params)(*args)
    T = series_function(d.T, d, params)(*args)
    V = series_function(d.V, d, params)(*args)
    residual = h - h[0] + dissipated - work_in
    scale = max(float(np.max(np.abs(T))), float(np.ptp(V)), float(np.ptp(h)),
                float(np.max(np.abs(dissipated))), float(np.max(np.abs(work_in))))
    worst = float(np.max(np.abs(residual)))
    relative = worst / scale if scale > 0 else worst
    notes = list(_notes(d, params))
    return EnergyAudit(t=t, h=h, T=T, V=V, dissipated=dissipated, work_in=work_in,
                       residual=residual, max_relative_residual=relative, tolerance=tolerance,
                       passed=bool(relative <= tolerance), natural=d.natural, notes=tuple(notes))


def homogeneity_degree(derivation: Derivation, params: dict[str, float], samples: int = 5):
    """Degree n when q̇·∂R/∂q̇ = n R holds at random states, else None."""
    d = derivation
    if d.R == 0:
        return None
    rng = np.random.default_rng(12345)
    args = [*d.q, *d.qd, sp.Symbol("t", real=True)]
    ratio = sp.lambdify(args, [numeric(d.dissipated_power, params), numeric(d.R, params)],
                        modules="math", cse=True)
    degrees = []
    for _ in range(samples):
        point = rng.uniform(0.2, 1.5, size=len(args))
        p, r = ratio(*point)
        if r == 0:
            return None
        degrees.append(p / r)
    n = float(np.mean(degrees))
    return n if np.allclose(degrees, n, rtol=1e-9, atol=1e-12) else None


def _notes(d: Derivation, params) -> list[str]:
    notes = []
    if d.natural:
        notes.append("T is a homogeneous quadratic form in the velocities and L does not depend "
                     "on t, so h = T + V.")
    else:
        notes.append("h differs from T + V (kinetic energy not homogeneous quadratic in the "
                     "velocities, or L depends on t): the audit uses h.")
    degree = homogeneity_degree(d, params)
    if degree is not None:
        identity = "= 2R (quadratic dissipation)" if abs(degree - 2) < 1e-9 else f"= {degree:g} R"
        notes.append(f"R is homogeneous of degree {degree:g} in the velocities: "
                     f"dissipated power q̇·∂R/∂q̇ {identity}, checked at random states.")
    elif d.R != 0:
        notes.append("R is not homogeneous in the velocities: dissipated power is q̇·∂R/∂q̇.")
    return notes
