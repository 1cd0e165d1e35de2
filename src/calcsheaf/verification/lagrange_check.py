"""Lagrange's equations evaluated a second way: numerically, from the calc's inputs.

The derivation (mechanics/lagrange.py) differentiates T, V, R and the point-force
positions symbolically and generates M(q, t), f(q, q̇, t), G and γ.  This check
takes only the input expressions as written in the calc file, evaluates them as
plain functions in DIGITS-digit arithmetic (mpmath), and forms at a few random
states, for a random trial acceleration a,

    E(a) = d/dt ∂L/∂q̇ − ∂L/∂q + ∂R/∂q̇ − Q,       L = T − V,

by central differences: ∂/∂q̇ and ∂/∂q with relative step STEP, and d/dt along
the path q(t+s) = q + s q̇ + s²/2 a, q̇(t+s) = q̇ + s a.  Q is the given
generalized force plus Σ F·∂r/∂q of each point force (virtual work, r differenced).
Lagrange's equations say E(a) = M a − f, so the check compares

    f:  −E(0)            with the derived f      (per equation),
    M:  E(a) − E(0)      with the derived M a,
    G:  ∂g/∂q            with the derived G       (per constraint),
    γ:  d²g/ds² along the path  with the derived G a − γ.

The derived side is the NumericSystem the integrators use (float64), so code
generation is checked too.  No symbolic derivative is shared with the
derivation.  Each residual is divided by the largest term of its equation
(∂T/∂q, ∂V/∂q, d/dt ∂L/∂q̇, ∂R/∂q̇, each force term, the derived value), so the
tolerance is relative to the forces in play: a term smaller than TOLERANCE
times the largest one cannot be told from round-off.  A state whose two step
sizes disagree sits on a switch of abs(), sign() or step() and is replaced.
"""

from __future__ import annotations

from dataclasses import dataclass

import mpmath
import numpy as np
import sympy as sp

from ..calcfile.expressions import TIME, symbol, velocity
from ..calcfile.spec import CalcSpec
from ..model import Check

DIGITS = 50            # working precision of the numerical side, decimal digits
STEP = 1e-15           # relative difference step (truncation ~STEP², round-off ~10^-DIGITS/STEP²)
TOLERANCE = 1e-9       # largest residual relative to the largest term of its equation
STATES = 3             # random states compared
ATTEMPTS = 24          # draws allowed to find STATES states where everything is defined
SEED = 1788            # fixed: the same calc gives the same states and residual


@dataclass(frozen=True)
class Residual:
    """Largest relative residual of one part (f, M, G, γ) of one equation."""
    value: float
    where: str                       # e.g. "f of x", "G of T_lift"


@dataclass(frozen=True)
class EquationCheckResult:
    worst: Residual
    states: int
    tolerance: float

    @property
    def passed(self) -> bool:
        return self.states > 0 and self.worst.value <= self.tolerance


class _Inputs:
    """T, V, R, Q, point forces and constraints of a calc as DIGITS-digit functions."""

    def __init__(self, spec: CalcSpec) -> None:
        names = spec.coordinate_names
        self.n = len(names)
        values = {symbol(p.name): sp.Float(p.value, DIGITS) for p in spec.parameters}
        args = [TIME, *(symbol(c) for c in names), *(velocity(c) for c in names)]

        def fn(expr):
            return sp.lambdify(args, expr.xreplace(values), modules="mpmath")

        self.T, self.V, self.R = fn(spec.kinetic), fn(spec.potential), fn(spec.dissipation)
        given = dict(spec.generalized_forces)
        self.Q = [fn(given.get(c, sp.Integer(0))) for c in names]
        self.points = [([fn(r) for r in pf.position], [fn(F) for F in pf.force])
                       for pf in spec.point_forces]
        self.g = [fn(c.equation) for c in spec.constraints]
        self.constraint_names = [c.name for c in spec.constraints]
        self.names = names


def _real(value) -> mpmath.mpf:
    """A real mp number; complex results (sqrt or log of a negative) mean outside the domain."""
    value = mpmath.mpmathify(value)
    if isinstance(value, mpmath.mpc):
        if value.imag != 0:
            raise ValueError("outside the domain of an expression")
        value = value.real
    if not mpmath.isfinite(value):
        raise ValueError("not finite")
    return value


class _State:
    """One state (t, q, q̇) and trial acceleration a, as mp numbers, with difference steps."""

    def __init__(self, t, q, qd, a, step: float) -> None:
        self.t = mpmath.mpf(float(t))
        self.q = [mpmath.mpf(float(v)) for v in q]
        self.qd = [mpmath.mpf(float(v)) for v in qd]
        self.a = [mpmath.mpf(float(v)) for v in a]
        rel = mpmath.mpf(step)
        self.hq = [rel * max(abs(v), mpmath.mpf(1)) for v in self.q]
        self.hv = [rel * max(abs(v), mpmath.mpf(1)) for v in self.qd]
        self.hs = rel * max(abs(self.t), mpmath.mpf(1))


def _call(fn, t, q, qd):
    return _real(fn(t, *q, *qd))


def _partial(fn, t, q, qd, which: str, j: int, h):
    """Central difference of fn in q_j (which="q") or q̇_j (which="v")."""
    plus, minus = list(q if which == "q" else qd), list(q if which == "q" else qd)
    plus[j] += h
    minus[j] -= h
    if which == "q":
        return (_call(fn, t, plus, qd) - _call(fn, t, minus, qd)) / (2 * h)
    return (_call(fn, t, q, plus) - _call(fn, t, q, minus)) / (2 * h)


def _along(state: _State, a, s):
    """(t, q, q̇) at t + s on the path with acceleration a."""
    q = [x + s * v + s * s / 2 * acc for x, v, acc in zip(state.q, state.qd, a)]
    qd = [v + s * acc for v, acc in zip(state.qd, a)]
    return state.t + s, q, qd


def _lagrange_terms(inputs: _Inputs, st: _State, a):
    """Per equation j: E_j(a) and the magnitudes of its terms."""
    n = inputs.n
    T, V = inputs.T, inputs.V

    def momentum(t, q, qd, j):
        return (_partial(T, t, q, qd, "v", j, st.hv[j]) - _partial(V, t, q, qd, "v", j, st.hv[j]))

    ahead, behind = _along(st, a, st.hs), _along(st, a, -st.hs)
    out = []
    for j in range(n):
        ddt = (momentum(*ahead, j) - momentum(*behind, j)) / (2 * st.hs)
        dT = _partial(T, st.t, st.q, st.qd, "q", j, st.hq[j])
        dV = _partial(V, st.t, st.q, st.qd, "q", j, st.hq[j])
        dR = _partial(inputs.R, st.t, st.q, st.qd, "v", j, st.hv[j])
        forces = [_call(inputs.Q[j], st.t, st.q, st.qd)]
        for positions, components in inputs.points:
            for r, F in zip(positions, components):
                forces.append(_call(F, st.t, st.q, st.qd) * _partial(r, st.t, st.q, st.qd, "q", j, st.hq[j]))
        E = ddt - (dT - dV) + dR - sum(forces)
        out.append((E, [ddt, dT, dV, dR, *forces]))
    return out


def _constraint_terms(inputs: _Inputs, st: _State):
    """Per constraint i: ∂g_i/∂q (row) and d²g_i/ds² along the path with acceleration a."""
    rows, second = [], []
    h = st.hs * 1e5      # second difference: round-off 10^-DIGITS / h² stays far below TOLERANCE
    for g in inputs.g:
        rows.append([_partial(g, st.t, st.q, st.qd, "q", j, st.hq[j]) for j in range(inputs.n)])
        values = [_call(g, *_along(st, st.a, s)) for s in (h, 0, -h)]
        second.append((values[0] - 2 * values[1] + values[2]) / (h * h))
    return rows, second


def _relative(derived: float, numerical, terms) -> float:
    """|derived − numerical| / largest term; 0/0 is 0, x/0 is infinite."""
    diff = abs(mpmath.mpf(derived) - numerical)
    scale = max([abs(mpmath.mpf(derived))] + [abs(x) for x in terms])
    if scale == 0:
        return 0.0 if diff == 0 else float("inf")
    return float(diff / scale)


def residuals_at(inputs: _Inputs, system, st: _State) -> list[Residual]:
    """Relative residuals of f, M, G and γ at one state (derived side from `system`)."""
    q, qd, a = (np.array([float(v) for v in x]) for x in (st.q, st.qd, st.a))
    M, f, G, gamma = system.matrices(float(st.t), q, qd)
    zero = [mpmath.mpf(0)] * inputs.n
    with_a, without = _lagrange_terms(inputs, st, st.a), _lagrange_terms(inputs, st, zero)
    out = []
    Ma = M @ a
    for j, name in enumerate(inputs.names):
        (Ea, _), (E0, terms_0) = with_a[j], without[j]
        out.append(Residual(_relative(f[j], -E0, terms_0), f"f of {name}"))
        inertia = [abs(M[j, k] * a[k]) for k in range(inputs.n)]
        out.append(Residual(_relative(Ma[j], Ea - E0, inertia + [Ea - E0]), f"M of {name}"))
    if inputs.g:
        rows, second = _constraint_terms(inputs, st)
        Ga = G @ a
        for i, name in enumerate(inputs.constraint_names):
            out += [Residual(_relative(G[i, j], rows[i][j], rows[i]), f"G of {name}")
                    for j in range(inputs.n)]
            terms = [abs(G[i, j] * a[j]) for j in range(inputs.n)] + [gamma[i], second[i]]
            out.append(Residual(_relative(Ga[i] - gamma[i], second[i], terms), f"γ of {name}"))
    return out


def random_states(spec: CalcSpec, rng: np.random.Generator):
    """Endless draws (t, q, q̇, a) around the initial state; spread halves every 4 draws."""
    names = spec.coordinate_names
    initial = dict(spec.initial)
    q0 = np.array([initial[c] for c in names])
    qd0 = np.array([initial[f"dot({c})"] for c in names])
    duration = spec.time_history.duration if spec.time_history is not None else 1.0
    spread = 1.0
    for draw in range(ATTEMPTS):
        if draw and draw % 4 == 0:
            spread /= 2
        q = q0 + spread * rng.uniform(-0.1, 0.1, len(names)) * np.maximum(np.abs(q0), 1.0)
        qd = qd0 + spread * rng.uniform(-1.0, 1.0, len(names)) * np.maximum(np.abs(qd0), 0.5)
        t = float(rng.uniform(0.0, duration))
        a = rng.uniform(-1.0, 1.0, len(names)) * 10.0
        yield t, q, qd, a


def check_equations(spec: CalcSpec, system, states: int = STATES,
                    tolerance: float = TOLERANCE) -> EquationCheckResult:
    """Compare the derived M, f, G, γ with Lagrange's equations evaluated numerically."""
    inputs = _Inputs(spec)
    rng = np.random.default_rng(SEED)
    worst, used = Residual(0.0, "-"), 0
    with mpmath.workdps(DIGITS):
        for t, q, qd, a in random_states(spec, rng):
            try:
                found = _smooth_residuals(inputs, system, t, q, qd, a, tolerance)
            except (ValueError, ZeroDivisionError, OverflowError, TypeError, ArithmeticError):
                continue
            if found is None:
                continue
            used += 1
            worst = max([worst, *found], key=lambda r: r.value)
            if used == states:
                break
    return EquationCheckResult(worst=worst, states=used, tolerance=tolerance)


def _smooth_residuals(inputs, system, t, q, qd, a, tolerance):
    """Residuals at a state; None when a second step size disagrees (a switch nearby)."""
    found = residuals_at(inputs, system, _State(t, q, qd, a, STEP))
    if max(r.value for r in found) <= tolerance:
        return found
    again = residuals_at(inputs, system, _State(t, q, qd, a, STEP * 1e3))
    if any(abs(x.value - y.value) > tolerance * max(1.0, x.value) for x, y in zip(found, again)):
        return None
    return found


def equations_check(spec: CalcSpec, system) -> Check:
    """The self-check row: the derived equations against the numerical Lagrange equations."""
    result = check_equations(spec, system)
    if not result.states:
        return Check("equations", "equations of motion re-derived numerically", False,
                     f"no state near the initial one where T, V, R, the forces and the derived "
                     f"equations are all defined ({ATTEMPTS} draws)")
    return Check("equations", "equations of motion re-derived numerically", result.passed,
                 f"Lagrange's equations from T, V, R and the forces by {DIGITS}-digit central "
                 f"differences at {result.states} random states: largest relative residual "
                 f"{result.worst.value:.1e} ({result.worst.where}; tolerance {result.tolerance:g})")
