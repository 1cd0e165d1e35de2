"""Equilibrium: the state about which the calc is linearised, found numerically.

Three kinds, chosen from the equations, each saying which time it is taken at
(t0 = 0 s, the start of the time history):

* ``static``: nothing depends on time.  Every velocity is zero and
  f(q, 0) + Gᵀλ = 0 with g(q) = 0.
* ``steady motion`` (a relative equilibrium): time enters only through
  driven constraints g(q, t) = 0 (e.g. φ − Ω t) and the motion they prescribe
  is steady.  The prescribed velocities are kept: q̇* is the least-squares
  solution of G q̇ = −∂g/∂t (zero in every free direction, the null space of
  G), and f(q, q̇*, t0) + Gᵀλ = 0 is solved for the other coordinates.  It is
  accepted only when q(t) = q* + q̇*(t − t0) solves the equations of motion
  (q̈ = 0) at several later times.
* ``static, time frozen at t0``: the calc is driven in a way that has no
  steady motion (base motion Y sin Ωt, a harmonic or step load).  Static
  equilibrium then sets every velocity to zero, prescribed ones included:
  the kinetic energy and the dissipation function give no force at rest, and
  the potential energy and the applied forces are taken as they act just
  after t0 (t = 0⁺), −∂V/∂q(q, 0⁺) + Q(q, 0, 0⁺) + Gᵀλ = 0 with g(q, t0) = 0:
  a step(a) or sign(a) whose argument a(q, t) is zero at t0 takes its right
  limit, the sign of the first non-zero t-derivative of a at t0 (so a load
  switched on with step(t) acts in full, not with step(0) = ½).  The
  linearisation about every kind of equilibrium uses the same right limits
  (`at_start`), so a stiffness switched on with step(t) counts in full.

The search starts from the calc's initial state (hybr, then lm).
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Callable

import numpy as np
import sympy as sp
from scipy import optimize

from ..calcfile.expressions import TIME
from ..errors import AnalysisError
from .codegen import NumericSystem, numeric
from .lagrange import diff_ae

T0 = 0.0                   # s: the time every equilibrium is taken at
STATIC, STEADY, FROZEN = "static", "steady motion", "static, time frozen"
# Later times (s after t0) at which a steady motion must still solve the equations:
# irregular, so that a periodic excitation is not sampled only at its zeros.
PERSISTENCE_TIMES = (0.0123, 0.1789, 0.7071, 2.2361, 7.3891)
SOLVE_TOL = 1e-7           # accepted residual, relative to the force scale
PERSIST_TOL = 1e-7         # accepted |M q̈| along a steady motion, relative to the force scale
RIGHT_LIMIT_ORDERS = 4     # t-derivatives of a switch argument tried for its sign just after t0


@dataclass(frozen=True)
class EquilibriumPoint:
    """The equilibrium state (SI).  `qd` holds the prescribed velocities of a steady motion
    (zero otherwise); `time` the time the loads and constraints are taken at."""
    q: np.ndarray
    qd: np.ndarray
    lambdas: np.ndarray
    residual: float
    kind: str = STATIC
    time: float = T0
    note: str = ""


def find_equilibrium(system: NumericSystem, q0: np.ndarray) -> EquilibriumPoint:
    """The equilibrium of the kind the equations call for; AnalysisError when none is found."""
    d = system.derivation
    if not _depends_on_time(d):
        q, lam, err, _ = _solve(_full_residual(system, lambda q: np.zeros(system.n)), q0, system.m)
        return EquilibriumPoint(q=q, qd=np.zeros(system.n), lambdas=lam, residual=err,
                                note=_static_note(d))
    velocity = lambda q: prescribed_velocity(system, q)
    try:
        q, lam, err, scale = _solve(_full_residual(system, velocity), q0, system.m)
    except AnalysisError:
        if _steady_drive(system, q0):
            raise _no_steady_motion(system, q0) from None
        q = None
    if q is not None:
        qd = velocity(q)
        if _persists(system, q, qd, scale):
            moving = bool(np.any(np.abs(qd) > 0))
            return EquilibriumPoint(
                q=q, qd=qd, lambdas=lam, residual=err, kind=STEADY if moving else STATIC,
                note=(f"steady motion: the velocities the constraints prescribe are kept "
                      f"({_listed(system, qd)}); positions at t = {T0:g} s") if moving else
                     "every velocity zero; the time-dependent terms are constant at rest")
    q, lam, err, _ = _solve(_frozen_residual(system), q0, system.m)
    dropped = prescribed_velocity(system, q)
    dropped_text = (f" ({_listed(system, dropped)} at t = {T0:g} s taken as zero)"
                    if np.any(np.abs(dropped) > 0) else "")
    switched = _switched_at_start(d, system.params)
    switched_text = (f"; {', '.join(switched)} switching at t = {T0:g} s taken as just after the "
                     "switch (right limit, e.g. step(0) = 1 for a load switched on at t = 0)"
                     if switched else "")
    return EquilibriumPoint(
        q=q, qd=np.zeros(system.n), lambdas=lam, residual=err, kind=FROZEN,
        note=(f"the calc is driven and has no steady motion, so the static equilibrium is "
              f"taken with the time frozen just after t = {T0:g} s (t = 0⁺) and every velocity "
              f"zero, prescribed ones included{dropped_text}: no inertia or damper force; the "
              f"potential energy and the applied forces as they act at t = 0⁺{switched_text}"))


def _static_note(d) -> str:
    """The note of a static equilibrium whose equations of motion do not depend on time."""
    timed = [name for name, e in (("T", d.T), ("V", d.V), ("R", d.R)) if e.has(TIME)]
    timed += ["the applied forces"] if any(e.has(TIME) for e in d.Q) else []
    if not timed:
        return "every velocity zero; nothing depends on time"
    return (f"every velocity zero; time enters {', '.join(timed)}, but not the equations of "
            "motion between switching instants (e.g. a step in a term linear in a velocity "
            "gives only an impulse at the switch), so the rest state does not depend on time")


def _switch_atoms(expr: sp.Expr) -> set:
    """The step (Heaviside) and sign applications of `expr` whose argument depends on time."""
    return {a for a in expr.atoms(sp.Heaviside, sp.sign) if a.args[0].has(TIME)}


def right_limit(expr: sp.Expr, t0: float = T0) -> sp.Expr:
    """`expr` with every time-dependent step(a) and sign(a) replaced by its limit as t → t0⁺.

    At a state q the limit is step/sign of a(q, t0) when that is non-zero, else of the
    first non-zero ∂ᵏa/∂tᵏ(q, t0) (k ≤ RIGHT_LIMIT_ORDERS); when all vanish, the value
    at a = 0 (step(0) = ½, sign(0) = 0) is kept.  Other terms are unchanged.
    """
    replacements = {}
    for atom in _switch_atoms(expr):
        func, a = atom.func, atom.args[0]
        orders = [a]
        for _ in range(RIGHT_LIMIT_ORDERS):
            orders.append(diff_ae(orders[-1], TIME))
        at = [o.xreplace({TIME: sp.Float(t0)}) for o in orders]
        pieces = [(func(v), sp.Ne(v, 0)) for v in at]
        replacements[atom] = sp.Piecewise(*pieces, (func(sp.Integer(0)), True))
    return expr.xreplace(replacements) if replacements else expr


def at_start(derivation):
    """The derivation with M, f and γ taken just after t0 (`right_limit`), for the
    linearisation about the equilibrium (unchanged when nothing switches at t0)."""
    d = derivation
    return replace(d, M=d.M.applyfunc(right_limit), f=d.f.applyfunc(right_limit),
                   gamma=d.gamma.applyfunc(right_limit))


def _switched_at_start(d, params: dict[str, float]) -> list[str]:
    """'step(t)' for each time-dependent switch of V or Q whose argument is zero at t0
    (with the parameters' values, for every q)."""
    out = []
    for atom in sorted(_switch_atoms(numeric(d.V, params)) | set().union(
            *(_switch_atoms(numeric(e, params)) for e in d.Q)), key=sp.default_sort_key):
        if atom.args[0].xreplace({TIME: sp.Float(T0)}).is_zero:
            name = "step" if atom.func is sp.Heaviside else "sign"
            out.append(f"{name}({sp.sstr(atom.args[0])})")
    return out


def _listed(system: NumericSystem, qd: np.ndarray) -> str:
    """'dot(phi) = 8 (SI)' for each non-zero velocity."""
    return ", ".join(f"dot({q}) = {v:.6g}" for q, v in zip(system.derivation.q, qd) if v != 0) + " (SI)"


def _steady_drive(system: NumericSystem, q0: np.ndarray) -> bool:
    """True when driven constraints prescribe non-zero rates ∂g/∂t that stay constant in time
    (e.g. φ − Ω t), so a steady motion is what the calc asks for."""
    if not system.m:
        return False
    zero = np.zeros(system.n)
    with np.errstate(all="ignore"):
        try:
            rates = [system.constraint_rate(T0 + s, q0, zero) for s in (0.0, *PERSISTENCE_TIMES)]
        except (ValueError, ArithmeticError):
            return False
    first = rates[0]
    size = float(np.max(np.abs(first)))
    return size > 0 and all(float(np.max(np.abs(r - first))) <= 1e-9 * size for r in rates)


def _no_steady_motion(system: NumericSystem, q0: np.ndarray) -> AnalysisError:
    return AnalysisError(
        f"no steady motion (relative equilibrium) was found from the initial state with the "
        f"velocities the driven constraints prescribe ({_listed(system, prescribed_velocity(system, q0))}); "
        "the other coordinates find no rest relative to the driven motion",
        key="analysis.equilibrium",
        fix="start [initial] nearer the relative equilibrium, or set [analysis] equilibrium = false "
            "if the system has none (e.g. a collar running out along a turning arm)")


def _depends_on_time(d) -> bool:
    return any(e.has(TIME) for e in (*d.M, *d.f, *d.g))


def prescribed_velocity(system: NumericSystem, q: np.ndarray) -> np.ndarray:
    """q̇ with G q̇ = −∂g/∂t at t0 and no component in the free directions (least squares)."""
    if not system.m:
        return np.zeros(system.n)
    zero = np.zeros(system.n)
    _, _, G, _ = system.matrices(T0, q, zero)
    rate = system.constraint_rate(T0, q, zero)          # = ∂g/∂t at q̇ = 0
    return np.linalg.lstsq(G, -rate, rcond=None)[0]


def _full_residual(system: NumericSystem, velocity: Callable) -> Callable:
    """x = [q, λ] -> [f(q, q̇(q), t0) + Gᵀλ, g(q, t0)]."""
    n = system.n

    def residual(x):
        q, lam = x[:n], x[n:]
        _, f, G, _ = system.matrices(T0, q, velocity(q))
        return np.concatenate([f + G.T @ lam, system.constraint_values(T0, q)])
    return residual


def _frozen_residual(system: NumericSystem) -> Callable:
    """x = [q, λ] -> [Q(q, 0, 0⁺) − ∂V/∂q(q, 0⁺) + Gᵀλ, g(q, t0)]: the loads at rest just after t0."""
    d, n = system.derivation, system.n
    at_rest = {v: sp.Integer(0) for v in d.qd}
    static = [right_limit(numeric(d.Q[i].xreplace(at_rest) - diff_ae(d.V, d.q[i]).xreplace(at_rest),
                                  system.params)) for i in range(n)]
    fn = sp.lambdify([TIME, *d.q], static, modules="math", cse=True)
    zero = np.zeros(n)

    def residual(x):
        q, lam = x[:n], x[n:]
        _, _, G, _ = system.matrices(T0, q, zero)
        force = np.array(fn(T0, *q), dtype=float)
        return np.concatenate([force + G.T @ lam, system.constraint_values(T0, q)])
    return residual


def _persists(system: NumericSystem, q: np.ndarray, qd: np.ndarray, scale: float) -> bool:
    """True when q* + q̇* s solves the equations of motion (q̈ = 0) at the later times:
    |M q̈| and |g| at most PERSIST_TOL × `scale` (the force scale of the search)."""
    worst = 0.0
    for s in (0.0, *PERSISTENCE_TIMES):
        t, qs = T0 + s, q + qd * s
        with np.errstate(all="ignore"):
            try:
                M, _, _, _ = system.matrices(t, qs, qd)
                qdd, _ = system.accelerations(t, qs, qd)
                g = system.constraint_values(t, qs)
            except (ValueError, ArithmeticError, np.linalg.LinAlgError):
                return False
        values = np.concatenate([M @ qdd, g])
        if not np.all(np.isfinite(values)):
            return False
        worst = max(worst, float(np.max(np.abs(values))) if values.size else 0.0)
    return worst <= PERSIST_TOL * scale


def _solve(residual: Callable, q0: np.ndarray, m: int):
    """Root of `residual` in [q, λ] from [q0, 0]: (q, λ, largest residual, force scale), the
    scale being max(1, largest residual at the start) in SI force units."""
    n = len(q0)
    x0 = np.concatenate([q0, np.zeros(m)])
    with np.errstate(all="ignore"):
        start = residual(x0)
    scale = max(1.0, float(np.max(np.abs(start)))) if np.all(np.isfinite(start)) else 1.0
    best = None
    for method in ("hybr", "lm"):
        with np.errstate(all="ignore"):
            try:
                sol = optimize.root(residual, x0, method=method, tol=1e-14)
                err = float(np.max(np.abs(residual(sol.x))))
            except (ValueError, ArithmeticError, np.linalg.LinAlgError):
                continue
        if not (np.all(np.isfinite(sol.x)) and np.isfinite(err)):
            continue
        if best is None or err < best[1]:
            best = (sol.x, err)
        if err <= 1e-9 * scale:
            break
    if best is None or not best[1] <= SOLVE_TOL * scale:
        left = "no finite solution" if best is None else f"a residual force of {best[1]:.3g} remains"
        raise AnalysisError(f"static equilibrium was not found from the initial state ({left})",
                            key="analysis.equilibrium",
                            fix="start [initial] nearer the rest position, or set "
                                "[analysis] equilibrium = false if the system has none")
    return best[0][:n], best[0][n:], best[1], scale
