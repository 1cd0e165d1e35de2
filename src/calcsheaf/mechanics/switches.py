"""Switches of the equations: where step, sign, abs, min, max or Piecewise change branch.

An integrator that meets a switch between two evaluations does not see it: a
1 ms force pulse falls between the steps of a run at rest, a 2 mm stiff stop
between the steps of a body coasting at constant speed (the right-hand side
is zero there, so the error estimate gives no warning).  Two kinds:

- explicit switches in time: an argument u(t) of a switching function that
  depends on t and parameters only.  Its roots in [0, duration] (dense scan,
  then Brent: energy.switch_times) are breakpoints; the runs integrate segment
  by segment and restart at each, with the right-hand side of a segment
  evaluated inside it (never at the breakpoint itself, where step(0) = 1/2).
- state switches: an argument a(t, q, q̇).  Each step is limited to
  h ≤ ½ (|a| + a_tol) / |ȧ| over every argument moving towards zero
  (a ȧ < 0), with ȧ = ∂a/∂t + ∇a·ẏ and
  a_tol = |∇a|·atol the size of a that the integrator's own tolerance cannot
  resolve.  To first order a step then moves an argument at most half way to
  zero, so it cannot cross a region where the argument changes sign twice;
  approaching a switch costs about log2(distance/a_tol) steps.  A region
  narrower than a_tol, or shorter in time than MIN_STEP_FRACTION of the
  duration, can still be stepped over.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np
import sympy as sp
import scipy.integrate
from scipy.optimize import brentq, minimize_scalar
from scipy.integrate import LSODA, OdeSolution, OdeSolver, solve_ivp

from ..calcfile.expressions import TIME, symbol
from .codegen import numeric
from .energy import ROOT_GRID, switch_times
from .lagrange import Derivation, diff_ae

MIN_STEP_FRACTION = 1e-12     # floor of the step limit, relative to the duration
SAFETY = 0.5                  # fraction of the distance to a switch one step may cover
EDGE = 1e-12                  # a segment's equations are read this far inside it, × max(1, duration) s


def switch_arguments(derivation: Derivation, params: dict[str, float],
                     exclude=()) -> tuple[tuple[sp.Expr, ...], tuple[sp.Expr, ...]]:
    """(time arguments u(t), state arguments a(t, q, q̇)) of the switching functions of the equations.

    Searched in L (T and V), R, the generalized forces Q, the equations f and
    the constraints g as written, with parameters substituted: not in their
    overflow-safe forms (codegen.numeric), whose |u| in a smooth function such
    as log(cosh u) is no switch.  Arguments in `exclude` (the Coulomb slip
    velocities that mechanics.stickslip handles by events) are left out, as
    are constants.
    """
    d = derivation
    states = set(d.q) | set(d.qd)
    values = {symbol(k): sp.Float(v) for k, v in params.items()}
    skip = {e.xreplace(values) for e in exclude}
    found: set[sp.Expr] = set()
    for source in (d.L, d.R, *d.Q, *d.f, *d.g):
        found.update(_arguments(source.xreplace(values)))
    time_args, state_args = [], []
    for a in sorted(found, key=sp.default_sort_key):
        if a in skip or -a in skip or not a.free_symbols:
            continue
        if a.free_symbols & states:
            state_args.append(a)
        elif a.has(TIME):
            time_args.append(a)
    return tuple(time_args), tuple(state_args)


def _arguments(expr: sp.Expr):
    """Arguments whose sign selects a branch: of step/sign/abs, differences in min/max, Piecewise conditions."""
    for node in sp.preorder_traversal(expr):
        if isinstance(node, (sp.Heaviside, sp.sign, sp.Abs)):
            yield node.args[0]
        elif isinstance(node, (sp.Min, sp.Max)):
            args = node.args
            yield from (args[i] - args[j] for i in range(len(args)) for j in range(i + 1, len(args)))
        elif isinstance(node, sp.Piecewise):
            for _, cond in node.args:
                for rel in _relationals(cond):
                    yield rel.lhs - rel.rhs


def _relationals(cond):
    if isinstance(cond, sp.core.relational.Relational) and not isinstance(cond, (sp.Eq, sp.Ne)):
        yield cond
    elif isinstance(cond, sp.logic.boolalg.BooleanFunction):
        for arg in cond.args:
            yield from _relationals(arg)


def breakpoints(time_args, duration: float) -> tuple[float, ...]:
    """Every root of the time arguments strictly inside (0, duration), merged within 1e-12·duration, s.

    energy.switch_times finds the sign changes between points of its scan;
    `hidden_roots` adds what that scan can miss: pairs of roots between two
    scan points, and a root next to a scan point where u is exactly zero.
    """
    roots = sorted(ts for u in time_args
                   for ts in (*(s.t for s in switch_times(u, duration)), *hidden_roots(u, duration)))
    merged: list[float] = []
    tol = 1e-12 * max(1.0, duration)
    for ts in roots:
        if tol < ts < duration - tol and (not merged or ts - merged[-1] > tol):
            merged.append(ts)
    return tuple(merged)


def hidden_roots(u: sp.Expr, duration: float, most: int = 1000) -> list[float]:
    """Roots of u(t) that a sign-change scan misses, on a second scan offset from energy.switch_times' grid
    by an irrational fraction of its spacing (so that a round switching time such as 0.5 s, an exact
    zero there, is not one here).  The sign changes of this scan are located (Brent); and where |u| has
    a local minimum without a sign change, u is minimised on the two neighbouring intervals (bounded
    Brent) and, if it crosses zero there, both roots are located.  At most `most` minima are examined."""
    spacing = duration / (ROOT_GRID - 1)
    grid = np.concatenate([[0.0], spacing * (np.arange(ROOT_GRID - 1) + 0.5 * (np.sqrt(5.0) - 1.0)),
                           [duration]])
    with np.errstate(all="ignore"):
        values = np.broadcast_to(np.asarray(sp.lambdify([TIME], u, modules="numpy")(grid), dtype=float),
                                 grid.shape)
    mag, sgn = np.abs(values), np.sign(values)
    inner = np.arange(1, len(grid) - 1)
    dips = inner[(mag[inner] <= mag[inner - 1]) & (mag[inner] <= mag[inner + 1])
                 & ((mag[inner] < mag[inner - 1]) | (mag[inner] < mag[inner + 1]))
                 & (sgn[inner - 1] == sgn[inner]) & (sgn[inner] == sgn[inner + 1]) & (sgn[inner] != 0)]
    scalar = sp.lambdify([TIME], u, modules="math")
    xtol = 1e-15 * max(1.0, duration)
    roots = [float(brentq(scalar, grid[i], grid[i + 1], xtol=xtol)) for i in np.nonzero(sgn[:-1] * sgn[1:] < 0)[0]]
    for i in dips[:most]:
        side = float(sgn[i])
        lo, hi = float(grid[i - 1]), float(grid[i + 1])
        best = minimize_scalar(lambda t: side * scalar(t), bounds=(lo, hi), method="bounded",
                               options={"xatol": 1e-15 * max(1.0, duration)})
        if not side * float(scalar(best.x)) < 0:
            continue
        roots += [float(brentq(scalar, lo, best.x, xtol=xtol)), float(brentq(scalar, best.x, hi, xtol=xtol))]
    return roots


class StepLimit:
    """h_max(t, y, ẏ) = max(floor, SAFETY · min of (|a| + a_tol)/|ȧ| over the arguments approaching zero), s.

    Only an argument moving towards zero (a ȧ < 0) limits the step: one
    moving away cannot reach zero to first order.  inf when none approaches.
    """

    def __init__(self, derivation: Derivation, params: dict[str, float], args, atol: np.ndarray,
                 duration: float) -> None:
        d = derivation
        self.n = len(d.q)
        self.count = len(args)
        variables = [*d.q, *d.qd]
        values = [numeric(a, params) for a in args]
        grads = [[diff_ae(a, TIME)] + [diff_ae(a, v) for v in variables] for a in values]
        call = [TIME, *variables]
        self._values = sp.lambdify(call, values, modules="math", cse=True)
        self._grads = sp.lambdify(call, grads, modules="math", cse=True)
        self.atol = np.asarray(atol, dtype=float)[:2 * self.n]
        self.floor = MIN_STEP_FRACTION * max(1.0, duration)

    def __call__(self, t: float, y, ydot) -> float:
        n2 = 2 * self.n
        state = np.asarray(y, dtype=float)[:n2]
        with np.errstate(all="ignore"):
            a = np.array(self._values(t, *state), dtype=float)
            g = np.array(self._grads(t, *state), dtype=float).reshape(self.count, n2 + 1)
            rate = g[:, 0] + g[:, 1:] @ np.asarray(ydot, dtype=float)[:n2]
        slack = np.abs(g[:, 1:]) @ self.atol
        approaching = np.isfinite(a) & np.isfinite(rate) & (a * rate < 0)
        if not approaching.any():
            return np.inf
        distance = (np.abs(a) + slack)[approaching] / np.abs(rate[approaching])
        return max(self.floor, SAFETY * float(np.min(distance)))


@dataclass(frozen=True)
class Switches:
    """The switches of a calc for the runs over [0, duration]."""
    times: tuple[float, ...]          # explicit switching times (breakpoints), s
    limit: StepLimit | None           # step limit from the state switches; None when there are none
    time_arguments: tuple[sp.Expr, ...] = ()
    state_arguments: tuple[sp.Expr, ...] = ()

    @property
    def any(self) -> bool:
        """True when the runs go segment by segment (also for a switch in time at t = 0 only, read inside)."""
        return bool(self.times) or self.limit is not None or bool(self.time_arguments)

    @property
    def clamps(self) -> bool:
        """True when the equations switch in time: segments are then read strictly inside (see `inside`)."""
        return bool(self.time_arguments)

    def edges(self, duration: float) -> list[float]:
        """[0, t_1, ..., t_k, duration]: the segments integrated one after another."""
        return [0.0, *self.times, float(duration)]


NONE = Switches((), None)


def find(derivation: Derivation, params: dict[str, float], duration: float, atol: np.ndarray,
         exclude=()) -> Switches:
    """The breakpoints and step limit of a calc (`exclude`: slip velocities handled by stick-slip events)."""
    time_args, state_args = switch_arguments(derivation, params, exclude)
    limit = StepLimit(derivation, params, state_args, atol, duration) if state_args else None
    return Switches(breakpoints(time_args, duration), limit, time_args, state_args)


def clamp(a: float, b: float, duration: float) -> Callable[[float], float]:
    """t ↦ t clamped to [a + ε, b − ε], ε = EDGE·max(1, duration): a time strictly inside [a, b], s."""
    eps = EDGE * max(1.0, duration)
    lo, hi = a + eps, max(a + eps, b - eps)
    return lambda t: min(max(t, lo), hi)


def inside(fun: Callable, a: float, b: float, duration: float, active: bool = True) -> Callable:
    """`fun(t, y)` read at `clamp`ed times: a segment's equations, never at its breakpoints (when `active`)."""
    if not active:
        return fun
    at = clamp(a, b, duration)
    return lambda t, y: fun(at(t), y)


def limited(method: str, limit: StepLimit, extra_rhs: Callable) -> type[OdeSolver]:
    """A scipy OdeSolver class whose max_step, read at every step, is `limit` at the current state.

    scipy's DOP853, Radau and BDF read self.max_step at each step; the
    derivative at the current state is the solver's own (self.f, kept by the
    Runge–Kutta and Radau solvers) or `extra_rhs` (BDF).
    """
    base = getattr(scipy.integrate, method)

    class Limited(base):
        @property
        def max_step(self):
            f = getattr(self, "f", None)
            ydot = f if f is not None else extra_rhs(self.t, self.y)
            return min(self._cap, limit(self.t, self.y, ydot))

        @max_step.setter
        def max_step(self, value):
            self._cap = value

    Limited.__name__ = f"Limited{method}"
    return Limited


@dataclass
class Result:
    """What solve_ivp returns, for a run pieced together from chunks (LSODA under a step limit)."""
    t: np.ndarray
    y: np.ndarray
    sol: OdeSolution | None
    t_events: list
    status: int
    message: str
    success: bool
    nfev: int


def solve(fun: Callable, span, y0, method: str, limit: StepLimit | None, **options):
    """solve_ivp over `span`, each step limited by `limit` when given.

    LSODA hands its step-size cap to ODEPACK once, when it starts (scipy's
    LSODA has no way to change it between steps), so under a limit it is run
    in chunks: from each state a chunk as long as the limit there, with that
    cap, restarted at the chunk's end.  Other methods use `limited`.
    """
    if limit is None:
        return solve_ivp(fun, span, y0, method=method, **options)
    if method != "LSODA":
        return solve_ivp(fun, span, y0, method=limited(method, limit, fun), **options)
    return _chunked(fun, span, y0, limit, **options)


def _chunked(fun, span, y0, limit: StepLimit, t_eval=None, events=None, dense_output=False, **options):
    t0, t_end = float(span[0]), float(span[1])
    y = np.asarray(y0, dtype=float)
    ts, interpolants, nfev = [t0], [], 0
    t_events = [[] for _ in (events or [])]
    status, message = 0, "The solver successfully reached the end of the integration interval."
    while t0 < t_end:
        h = min(limit(t0, y, fun(t0, y)), t_end - t0)
        nfev += 1
        t1 = t_end if t_end - (t0 + h) <= 1e-15 * max(1.0, abs(t_end)) else t0 + h
        sol = solve_ivp(fun, (t0, t1), y, method=LSODA, max_step=max(h, 1e-300), dense_output=True,
                        events=events, **options)
        nfev += int(sol.nfev)
        if not sol.success:
            return Result(np.array([]), np.zeros((len(y), 0)), None, t_events, int(sol.status), str(sol.message),
                          False, nfev)
        ts.extend(np.asarray(sol.sol.ts)[1:])
        interpolants.extend(sol.sol.interpolants)
        y, t0 = sol.y[:, -1], float(sol.t[-1])
        if sol.status == 1:
            t_events = [list(e) for e in sol.t_events]
            status, message = 1, str(sol.message)
            break
    dense = OdeSolution(np.array(ts), interpolants)
    if t_eval is not None:
        t_out = np.asarray(t_eval, dtype=float)
        t_out = t_out[t_out <= t0]
    else:
        t_out = np.array(ts)
    values = dense(t_out) if len(t_out) else np.zeros((len(y), 0))
    values = values.reshape(len(y), -1)
    if len(t_out) and t_out[-1] == t0:
        values[:, -1] = y
    return Result(t_out, values, dense if dense_output else None,
                  [np.array(e) for e in t_events], status, message, True, nfev)
