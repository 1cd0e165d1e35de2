"""Energy audit with the energy function h = Σ q̇ ∂L/∂q̇ − L (Jacobi integral).

Balance: dh/dt = −∂L/∂t − q̇·∂R/∂q̇ + Q·q̇ + λᵀG q̇.  The residual
h(t) − h(0) + W_d(t) − W_in(t) is normalised by the largest energy scale of the
run (peak T, range of V and of h, total dissipated and input work).  h equals
T + V only for natural systems; a rheonomic system is audited on h.

A step() or sign() of a function of t alone switches L at known times t_s.
There ∂L/∂t holds a Dirac term that the integrated power (taken almost
everywhere) leaves out; its integral is the jump of L at the state reached,
so −ΔL(t_s, q(t_s), q̇(t_s)) is added to W_in from t_s on (half of it at a
sample exactly at t_s, where step(0) = 1/2 and sign(0) = 0).  A switch that
makes the momentum ∂L/∂q̇ jump needs an impulse the equations do not hold:
the audit then fails and says so.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np
import sympy as sp
from scipy.optimize import brentq

from ..calcfile.expressions import TIME
from ..model import EnergyAudit
from .codegen import numeric, series_function
from .lagrange import Derivation, diff_ae

ROOT_GRID = 20_001           # points on [0, duration] searched for sign changes of a switch
MOMENTUM_JUMP = 1e-12        # relative jump of ∂L/∂q̇ taken as a real jump


@dataclass(frozen=True)
class Switch:
    """u(t) crosses zero at t (s) inside the grid cell [lo, hi]; signs of u before and after.

    At t = 0 and at the end of the record the side outside it is taken as the opposite of
    the side inside, so that the value there (step(0) = 1/2, sign(0) = 0) is midway.
    """
    t: float
    lo: float
    hi: float
    before: int
    after: int


@dataclass(frozen=True)
class Jump:
    """L switched at t (s): `work` = −ΔL (J) at the state reached, put in by the switch."""
    switch: Switch
    argument: sp.Expr
    work: float
    momentum_jump: float      # largest |Δ ∂L/∂q̇| relative to |∂L/∂q̇|; 0 when continuous


def audit(derivation: Derivation, params: dict[str, float], t, Q, QD, QDD, LAM,
          dissipated, work_in, tolerance: float,
          state: Callable[[float], np.ndarray]) -> EnergyAudit:
    """Energy audit along a history; `state(t)` gives [q, q̇, ...] between samples (dense output)."""
    d = derivation
    args = (t, Q, QD, QDD, LAM)
    h = series_function(d.energy_function, d, params)(*args)
    T = series_function(d.T, d, params)(*args)
    V = series_function(d.V, d, params)(*args)
    jumps = switch_jumps(d, params, float(t[-1]), state)
    switched = jump_work(jumps, t)
    work_in = work_in + switched - switched[0]
    residual = h - h[0] + dissipated - work_in
    scale = max(float(np.max(np.abs(T))), float(np.ptp(V)), float(np.ptp(h)),
                float(np.max(np.abs(dissipated))), float(np.max(np.abs(work_in))))
    worst = float(np.max(np.abs(residual)))
    relative = worst / scale if scale > 0 else worst
    impulsive = [j for j in jumps if j.momentum_jump > MOMENTUM_JUMP]
    if impulsive:
        relative = np.inf
    is_natural = natural(d, params)
    notes = list(_notes(d, params, is_natural)) + _jump_notes(jumps, impulsive)
    return EnergyAudit(t=t, h=h, T=T, V=V, dissipated=dissipated, work_in=work_in,
                       residual=residual, max_relative_residual=relative, tolerance=tolerance,
                       passed=bool(relative <= tolerance), natural=is_natural, notes=tuple(notes))


def time_switches(derivation: Derivation, params: dict[str, float]) -> tuple[sp.Expr, ...]:
    """Arguments u(t) of the step() and sign() terms of L that depend on t alone."""
    d = derivation
    states = set(d.q) | set(d.qd)
    found = set()
    for atom in numeric(d.L, params).atoms(sp.Heaviside, sp.sign):
        u = atom.args[0]
        if u.has(TIME) and not u.free_symbols & states:
            found.add(u)
    return tuple(sorted(found, key=sp.default_sort_key))


def switch_times(u: sp.Expr, duration: float) -> list[Switch]:
    """Where u(t) is zero or changes sign on [0, duration]: a grid scan, then Brent's method."""
    grid = np.linspace(0.0, duration, ROOT_GRID)
    fn = sp.lambdify([TIME], u)        # numpy, the default
    with np.errstate(all="ignore"):
        signs = np.sign(fn(grid))
    last = len(grid) - 1
    found = []
    for i in np.nonzero(signs == 0)[0]:
        before = signs[i - 1] if i > 0 else -signs[i + 1]
        after = signs[i + 1] if i < last else -before
        found.append(Switch(float(grid[i]), float(grid[max(i - 1, 0)]), float(grid[min(i + 1, last)]),
                            int(before), int(after)))
    for i in np.nonzero(signs[:-1] * signs[1:] < 0)[0]:
        root = float(brentq(fn, grid[i], grid[i + 1]))
        found.append(Switch(root, float(grid[i]), float(grid[i + 1]), int(signs[i]), int(signs[i + 1])))
    return sorted(found, key=lambda s: s.t)


def switch_jumps(derivation: Derivation, params: dict[str, float], duration: float,
                 state: Callable[[float], np.ndarray]) -> list[Jump]:
    """Every switch of L in time over [0, duration], with its work and momentum jump.

    Each argument's switches are taken one by one, the other step() and sign() terms
    at their values at that time: exact for an L linear in each switching term.  Two
    different arguments switching at the same instant inside a product of both would
    be booked wrongly, and the audit would then fail (never pass falsely).
    """
    d = derivation
    L = numeric(d.L, params)
    momenta = [diff_ae(L, v) for v in d.qd]
    jumps = []
    for u in time_switches(d, params):
        for switch in switch_times(u, duration):
            y = state(switch.t)
            point = {TIME: sp.Float(switch.t), **{s: sp.Float(v) for s, v in zip((*d.q, *d.qd), y)}}
            left, right = _sides(u, switch)
            L_left, L_right = (float(L.xreplace(side).xreplace(point)) for side in (left, right))
            p_left = np.array([float(p.xreplace(left).xreplace(point)) for p in momenta])
            p_right = np.array([float(p.xreplace(right).xreplace(point)) for p in momenta])
            size = float(np.max(np.abs(np.concatenate([p_left, p_right]))))
            change = float(np.max(np.abs(p_right - p_left)))
            jumps.append(Jump(switch=switch, argument=u, work=L_left - L_right,
                              momentum_jump=change / size if size > 0 else change))
    return sorted(jumps, key=lambda j: j.switch.t)


def _sides(u: sp.Expr, switch: Switch) -> tuple[dict, dict]:
    """Values of step(u) and sign(u) just before and just after the switch."""
    before, after = sp.Integer(switch.before), sp.Integer(switch.after)
    return ({sp.Heaviside(u): sp.Heaviside(before), sp.sign(u): sp.sign(before)},
            {sp.Heaviside(u): sp.Heaviside(after), sp.sign(u): sp.sign(after)})


def jump_work(jumps: list[Jump], t) -> np.ndarray:
    """Σ of the switch work up to each sample: all of it after the switch, half exactly at it.

    Inside the grid cell of a switch the side of a sample is read from the sign of u
    there, as the step() in h is.
    """
    total = np.zeros(len(t))
    for j in jumps:
        s = j.switch
        inside = (t >= s.lo) & (t <= s.hi)
        weight = np.where(t > s.hi, 1.0, 0.0)
        if inside.any():
            weight[inside] = np.heaviside(s.after * sp.lambdify([TIME], j.argument)(t[inside]), 0.5)
        total += j.work * weight
    return total


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


def _jump_notes(jumps: list[Jump], impulsive: list[Jump]) -> list[str]:
    notes = []
    if jumps:
        times = ", ".join(f"{j.switch.t:.6g}" for j in jumps[:5]) + (", ..." if len(jumps) > 5 else "")
        notes.append(f"L switches in time {len(jumps)} time(s) (step() or sign() of a function of t "
                     f"alone), at t = {times} s: the jump −ΔL at the state reached, "
                     f"{sum(j.work for j in jumps):.6g} J in all, is counted in the work put in.")
    for j in impulsive:
        notes.append(f"At t = {j.switch.t:.6g} s the momentum ∂L/∂q̇ jumps (relative change "
                     f"{j.momentum_jump:.3g}): a kinetic energy that switches in time needs an "
                     "impulse, which the equations (taken almost everywhere) leave out, so the "
                     "motion after the switch is not determined by them. Smooth the switch in T.")
    return notes


def _notes(d: Derivation, params, is_natural: bool) -> list[str]:
    notes = []
    if is_natural:
        notes.append("T is a homogeneous quadratic form in the velocities and L does not depend "
                     "on t, so h = T + V.")
    if d.lambdas and sp.Matrix(d.g).has(TIME):
        notes.append("A constraint depends on t (a prescribed motion): its force does work "
                     "λ·G q̇, counted in the work put in, so h (and T + V) is not conserved.")
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
