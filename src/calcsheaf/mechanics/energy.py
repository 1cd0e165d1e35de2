"""Energy audit with the energy function h = Σ q̇ ∂L/∂q̇ − L (Jacobi integral).

Balance: dh/dt = −∂L/∂t − q̇·∂R/∂q̇ + Q·q̇ + λᵀG q̇.  The residual
h(t) − h(0) + W_d(t) − W_in(t) is normalised by the largest energy scale of the
run (peak T, range of V and of h, total dissipated and input work).  h equals
T + V only for natural systems; a rheonomic system is audited on h.
"""

from __future__ import annotations

import numpy as np
import sympy as sp

from ..calcfile.expressions import TIME
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
    is_natural = natural(d, params)
    notes = list(_notes(d, params, is_natural))
    return EnergyAudit(t=t, h=h, T=T, V=V, dissipated=dissipated, work_in=work_in,
                       residual=residual, max_relative_residual=relative, tolerance=tolerance,
                       passed=bool(relative <= tolerance), natural=is_natural, notes=tuple(notes))


def natural(derivation: Derivation, params: dict[str, float], samples: int = 3) -> bool:
    """True when h = T + V: L free of t and h − T − V zero at random states.

    Evaluated in 30-digit arithmetic instead of expanding symbolically: expanding
    a high power such as (1 + x/L)**1024 takes minutes, evaluating it does not.
    """
    d = derivation
    if d.L.has(TIME):
        return False
    rng = np.random.default_rng(24680)
    gap = numeric(d.energy_function - d.T - d.V, params)
    scale = numeric(sp.Abs(d.T) + sp.Abs(d.V), params)
    checked = 0
    for _ in range(4 * samples):
        point = {s: sp.Float(v, 30) for s, v in zip((*d.q, *d.qd), rng.uniform(0.2, 1.5, 2 * len(d.q)))}
        g, size = (e.xreplace(point).evalf(30) for e in (gap, scale))
        if not (g.is_finite and size.is_finite):
            continue
        if bool(sp.Abs(g) > 1e-15 * size):
            return False
        checked += 1
        if checked == samples:
            return True
    return False


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
        try:
            p, r = ratio(*point)
        except (ValueError, ArithmeticError):
            continue
        if r == 0:
            return None
        degrees.append(p / r)
    if not degrees:
        return None
    n = float(np.mean(degrees))
    return n if np.allclose(degrees, n, rtol=1e-9, atol=1e-12) else None


def _notes(d: Derivation, params, is_natural: bool) -> list[str]:
    notes = []
    if is_natural:
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
