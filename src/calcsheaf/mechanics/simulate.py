"""Time histories: DOP853 with the energy integrals, and an independent second integrator.

The primary run integrates y = [q, q̇, W_d, W_in] where Ẇ_d = q̇·∂R/∂q̇ is the
dissipated power and Ẇ_in = Q·q̇ − ∂L/∂t + λᵀG q̇ the power put in.  The second
run (LSODA by default, a different family) integrates [q, q̇] alone.  A failed
integration is data: status, message and evaluation count.  When the primary
run fails, the second run is given at most SECOND_RUN_BUDGET times the
primary's evaluations: enough to show whether another family gets through
(stiff equations), without grinding on towards a blow-up.

The second run is evaluated on the comparison grid (the samples, every step of
the primary with points inside, and POINTS_PER_PERIOD per period of the
fastest frequency seen) and compared there with the primary's dense output.
With Coulomb terms sign(s) both runs go through sliding and stuck phases
(mechanics.stickslip), one solve_ivp per phase, ended by located events.
With switches (mechanics.switches) both runs restart at every explicit
switching time and limit each step by the distance to the state switches.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np
import sympy as sp
from scipy.integrate import solve_ivp

from ..calcfile.expressions import TIME
from ..calcfile.spec import TimeHistorySpec
from ..model import SolverRun
from .codegen import NumericSystem, numeric
from .lagrange import Derivation
from . import switches as sw
from .stickslip import STUCK, Phase, StickSlip, affine_in, slip_terms


SECOND_RUN_BUDGET = 2
MIN_BUDGET = 10_000
POINTS_PER_PERIOD = 20            # comparison grid: points per period of the fastest frequency seen
STEP_SUBDIVISIONS = 4             # comparison and extremes grid: parts of each primary step
MAX_UNIFORM = 200_000             # cap on the uniform part of the comparison grid
MAX_FINE = 400_000                # cap on the step grid with points inside steps
MAX_PHASES = 20_000               # stick-slip phases at most before the run is stopped as chattering


class _RhsFailure(Exception):
    pass


@dataclass
class Run:
    solver: SolverRun
    t: np.ndarray
    y: np.ndarray                 # (states, N); empty when the run failed
    dense: object = None          # OdeSolution (or PiecewiseSolution) of the primary run
    accelerations: Callable | None = None   # (t, q, q̇) -> q̈, λ in the run's stick-slip phase
    phases: tuple = ()            # stickslip.Phase of a run with Coulomb friction
    sigma: Callable | None = None   # (t, q, q̇) -> σ of each Coulomb term in the run's phase
    terms: tuple = ()             # the Coulomb terms sign(s_j) that σ stands for


class PiecewiseSolution:
    """The dense solutions of consecutive phases as one function of time (like OdeSolution)."""

    def __init__(self, phases) -> None:
        self.phases = tuple(phases)
        self._starts = np.array([p.t0 for p in self.phases])
        self.ts = np.unique(np.concatenate([np.asarray(p.solution.ts) for p in self.phases]))

    def _index(self, t: np.ndarray) -> np.ndarray:
        return np.clip(np.searchsorted(self._starts, t, side="right") - 1, 0, len(self.phases) - 1)

    def __call__(self, t):
        tt = np.atleast_1d(np.asarray(t, dtype=float))
        idx = self._index(tt)
        out = None
        for k in np.unique(idx):
            part = np.asarray(self.phases[k].solution(tt[idx == k])).reshape(-1, int(np.sum(idx == k)))
            if out is None:
                out = np.empty((part.shape[0], len(tt)))
            out[:, idx == k] = part
        return out[:, 0] if np.ndim(t) == 0 else out

    def mode_at(self, t: float) -> tuple[int, ...]:
        return self.phases[int(self._index(np.array([t]))[0])].mode


def power_functions(derivation: Derivation, params: dict[str, float]):
    """Scalar functions (t, q, q̇, λ) -> dissipated power, input power."""
    d = derivation
    constraint_power = sp.Integer(0)
    if d.lambdas:
        constraint_power = (sp.Matrix(d.lambdas).T * d.G * sp.Matrix(d.qd))[0]
    args = [TIME, *d.q, *d.qd, *d.lambdas]
    exprs = [numeric(d.dissipated_power, params),
             numeric(d.input_power - d.explicit_time_rate + constraint_power, params)]
    return sp.lambdify(args, exprs, modules="math", cse=True)


def integrate(system: NumericSystem, spec: TimeHistorySpec, y0: np.ndarray, powers,
              linear_hz: float = 0.0, plan: StickSlip | None = None,
              switches: sw.Switches = sw.NONE) -> tuple[Run, Run, Grid]:
    """Primary (DOP853 with energy integrals) and secondary runs over [0, duration].

    The primary run is stored at the user's samples with its dense output; the
    secondary run is evaluated on the comparison grid (see `comparison_grid`),
    which `agreement` compares with the primary's dense output.
    `linear_hz` is the highest linearised frequency (0 when unknown).  With a
    stick-slip `plan` (Coulomb friction) both runs go through sliding and stuck
    phases located by events.  `switches` (see `find_switches`) gives both
    runs their breakpoints and step limit.
    """
    t_eval = np.linspace(0.0, spec.duration, spec.points)
    n = system.n

    def primary_rhs(t, y):
        q, qd = y[:n], y[n:2 * n]
        qdd, lam = _safe(system.accelerations, t, q, qd)
        p_diss, p_in = powers(t, *q, *qd, *lam)
        out = np.concatenate([qd, qdd, [p_diss, p_in]])
        if not np.all(np.isfinite(out)):
            raise _RhsFailure(f"non-finite acceleration or power at t = {t:.6g} s")
        return out

    def secondary_rhs(t, y):
        out = _safe(system.rhs, t, y)
        if not np.all(np.isfinite(out)):
            raise _RhsFailure(f"non-finite acceleration at t = {t:.6g} s")
        return out

    atol = _atol(y0, spec.atol)
    energy_atol = np.concatenate([atol, [spec.atol, spec.atol]])
    if plan is None:
        first = _run("DOP853", primary_rhs, np.concatenate([y0, [0.0, 0.0]]), t_eval, spec,
                     energy_atol, dense=True, switches=switches)
    else:
        first = _phased_run("DOP853", plan, np.concatenate([y0, [0.0, 0.0]]), t_eval, spec, energy_atol,
                            energy=True, switches=switches)
    grid = comparison_grid(first, t_eval, n, linear_hz) if first.solver.success else Grid(t_eval, 0.0, "", False)
    budget = None if first.solver.success else max(SECOND_RUN_BUDGET * first.solver.nfev, MIN_BUDGET)
    # The multistep check runs 100 times tighter: its error constant is larger.
    if plan is None:
        second = _run(spec.second_method, secondary_rhs, y0, grid.t, spec, atol, dense=False, tighten=1e-2,
                      budget=budget, switches=switches)
    else:
        second = _phased_run(spec.second_method, plan, y0, grid.t, spec, atol, energy=False, tighten=1e-2,
                             budget=budget, switches=switches)
    return first, second, grid


def stick_slip(derivation: Derivation, params: dict[str, float]) -> StickSlip | None:
    """The stick-slip treatment of the calc's Coulomb terms, or None when it has none (or not affine)."""
    terms = slip_terms(derivation)
    if not terms:
        return None
    plan = StickSlip(derivation, params, terms)
    return plan if affine_in(terms, derivation, plan.sigma) else None


def find_switches(derivation: Derivation, params: dict[str, float], spec: TimeHistorySpec,
                  plan: StickSlip | None) -> sw.Switches:
    """Breakpoints and step limit of the runs (mechanics.switches); the plan's slip terms go by events."""
    exclude = tuple(term.args[0] for term in plan.terms) if plan is not None else ()
    atol = _atol(np.zeros(2 * len(derivation.q)), spec.atol)
    return sw.find(derivation, params, spec.duration, atol, exclude)


def _phased_run(method, plan: StickSlip, y0, t_eval, spec: TimeHistorySpec, atol, energy: bool,
                tighten: float = 1.0, budget: int | None = None, switches: sw.Switches = sw.NONE) -> Run:
    """A run through sliding and stuck phases (see mechanics.stickslip), one solve_ivp per phase.

    Each phase ends at an event (a slip velocity reaching zero, a stuck
    term's friction reaching its limit), where the mode is chosen afresh, or
    at an explicit switching time, where each stuck term is decided afresh
    (the force needed to hold it may have jumped past the friction limit).
    """
    n = plan.n
    counter = {"nfev": 0}
    rtol, atol = max(spec.rtol * tighten, 1e-13), atol * tighten
    rest = np.full(len(plan.terms), float(np.max(atol[n:2 * n])))
    t0, y = 0.0, np.asarray(y0, dtype=float).copy()
    phases: list[Phase] = []
    edges = switches.edges(spec.duration)
    try:
        at = (lambda t: _inside_time(edges, t, spec.duration)) if switches.clamps else (lambda t: t)
        mode = _safe(plan.initial_mode, at(0.0), y[:n], y[n:2 * n], rest)
        for j in range(len(mode)):
            y = plan.stick(y, mode, j)
        while True:
            a, b = _segment(edges, t0)
            rhs = sw.inside(_phase_rhs(plan, mode, energy, counter, budget), a, b, spec.duration,
                            switches.clamps)
            events, outcomes = _phase_events(plan, mode, sw.clamp(a, b, spec.duration) if switches.clamps
                                             else (lambda t: t))
            sol = sw.solve(rhs, (t0, b), y, method, switches.limit, rtol=rtol, atol=atol,
                           dense_output=True, events=events or None)
            if not sol.success:
                solver = SolverRun(method, False, int(sol.status), str(sol.message), counter["nfev"])
                return Run(solver, t_eval, np.zeros((len(y0), 0)))
            t1 = float(sol.t[-1])
            if t1 > t0:
                phases.append(Phase(t0, t1, mode, sol.sol))
            if t1 >= spec.duration or (sol.status == 0 and b >= spec.duration):
                break
            if sol.status == 0:
                y, t0 = sol.y[:, -1].copy(), b
                mode = _redecide_stuck(plan, mode, at(b), y)
                continue
            if len(phases) >= MAX_PHASES:
                raise _RhsFailure(f"stopped at t = {t1:.6g} s after {MAX_PHASES} stick-slip phases "
                                  "(friction chattering between sticking and sliding)")
            k = next(i for i, te in enumerate(sol.t_events) if len(te))
            j, new = outcomes[k]
            y = sol.y[:, -1].copy()
            if new is None:
                new = _safe(plan.mode_at_rest, at(t1), y[:n], y[n:2 * n], mode, j)
            mode = tuple(new if i == j else v for i, v in enumerate(mode))
            y, t0 = plan.stick(y, mode, j), t1
    except _RhsFailure as exc:
        return Run(SolverRun(method, False, -1, str(exc), counter["nfev"]), t_eval, np.zeros((len(y0), 0)))
    dense = PiecewiseSolution(phases)
    stuck = sum(STUCK in p.mode for p in phases)
    solver = SolverRun(method, True, 0, f"The solver successfully reached the end of the integration "
                       f"interval in {len(phases)} stick-slip phase(s), {stuck} with friction stuck.",
                       counter["nfev"])
    accelerations = lambda t, q, qd: plan.accelerations(t, q, qd, dense.mode_at(t))
    sigma = lambda t, q, qd: plan.sigma_of(t, q, qd, dense.mode_at(t))
    return Run(solver, np.asarray(t_eval, dtype=float), dense(t_eval), dense, accelerations, tuple(phases),
               sigma, plan.terms)


def _phase_rhs(plan: StickSlip, mode, energy: bool, counter, budget):
    """y' in one phase: [q̇, q̈] (and the two powers when `energy`)."""
    n = plan.n

    def rhs(t, y):
        if budget is not None and counter["nfev"] >= budget:
            raise _RhsFailure(f"stopped at t = {t:.6g} s after {budget} evaluations, the budget "
                              "of the independent run once the primary run has failed")
        counter["nfev"] += 1
        q, qd = y[:n], y[n:2 * n]
        sigma = _safe(plan.sigma_of, t, q, qd, mode)
        qdd, lam = _safe(plan.solve, t, q, qd, sigma)
        parts = [qd, qdd]
        if energy:
            parts.append(_safe(plan.powers, t, q, qd, lam, sigma))
        out = np.concatenate(parts)
        if not np.all(np.isfinite(out)):
            raise _RhsFailure(f"non-finite acceleration or power at t = {t:.6g} s")
        return out
    return rhs


def _segment(edges: list[float], t: float) -> tuple[float, float]:
    """The segment [a, b) between explicit switching times that holds t, s."""
    k = int(np.searchsorted(edges, t, side="right")) - 1
    k = min(max(k, 0), len(edges) - 2)
    return edges[k], edges[k + 1]


def _inside_time(edges: list[float], t: float, duration: float) -> float:
    """A time just after t inside the segment that starts at or holds t, where its switches hold, s."""
    a, b = _segment(edges, t)
    return sw.clamp(a, b, duration)(t)


def _redecide_stuck(plan: StickSlip, mode, t: float, y) -> tuple[int, ...]:
    """At an explicit switching time: each stuck term stays stuck or slides on (mode_at_rest)."""
    n = plan.n
    new = list(mode)
    for j, state in enumerate(mode):
        if state == STUCK:
            new[j] = _safe(plan.mode_at_rest, t, y[:n], y[n:2 * n], tuple(new), j)
    return tuple(new)


def _phase_events(plan: StickSlip, mode, clamp=lambda t: t):
    """Terminal events of a phase and, for each, (term, new mode or None = decide at rest).

    Like the equations, the events are read at `clamp(t)` (inside the segment, mechanics.switches.clamp).
    """
    n = plan.n
    events, outcomes = [], []
    for j, state in enumerate(mode):
        if state != STUCK:
            def slip(t, y, j=j):
                return plan.slip(clamp(t), y[:n], y[n:2 * n])[j]
            slip.terminal, slip.direction = True, -state
            events.append(slip)
            outcomes.append((j, None))
            continue
        for limit in (1.0, -1.0):
            def breakaway(t, y, j=j, limit=limit):
                return plan.sigma_of(clamp(t), y[:n], y[n:2 * n], mode)[j] - limit
            breakaway.terminal, breakaway.direction = True, limit
            events.append(breakaway)
            outcomes.append((j, int(limit)))
    return events, outcomes


@dataclass(frozen=True)
class Grid:
    """Times at which the dense solution is examined (comparison, extremes), s."""
    t: np.ndarray
    fastest_hz: float             # highest frequency seen: linearised or observed, Hz
    basis: str                    # "linearised" or "observed"
    capped: bool                  # the uniform part was limited to MAX_UNIFORM points


def step_grid(first: Run, samples: np.ndarray) -> np.ndarray:
    """The samples, every step of the primary integrator and STEP_SUBDIVISIONS − 1 points inside each.

    The integrator's steps follow the fastest dynamics it met (short steps
    through an impact), so this grid sees what happens between samples.  Above
    MAX_FINE points only the step ends are kept.
    """
    ts = np.asarray(first.dense.ts, dtype=float)
    parts = STEP_SUBDIVISIONS if len(ts) * STEP_SUBDIVISIONS <= MAX_FINE else 1
    inner = ts[:-1, None] + np.diff(ts)[:, None] * (np.arange(1, parts) / parts)
    return np.unique(np.concatenate([samples, ts, inner.ravel()]))


def observed_frequency(t: np.ndarray, Y: np.ndarray, n: int) -> float:
    """Fastest frequency seen in a record of [q, q̇], Hz: max over coordinates of
    max|q̈| / (2π max|q̇|), also with the steady part taken out (q̇ less its straight-line
    fit, q̈ less its mean) where that leaves more than 0.1 % of the velocity.

    For q = A sin ωt this is ω/2π exactly; through an impact on a stiff spring it is
    that spring's contact frequency; for an oscillation riding on a steady
    acceleration (a load being hoisted on a rope) the detrended ratio finds the
    oscillation, which the plain ratio underestimates.  q̈ from differences of q̇.
    """
    best = 0.0
    if len(t) < 3:
        return best
    for i in range(n):
        v = Y[n + i]
        a = np.diff(v) / np.diff(t)
        best = max(best, _ratio(a, v))
        v_osc = v - np.polyval(np.polyfit(t, v, 1), t)
        if np.max(np.abs(v_osc)) > 1e-3 * np.max(np.abs(v)):
            best = max(best, _ratio(a - np.mean(a), v_osc))
    return best


def _ratio(a: np.ndarray, v: np.ndarray) -> float:
    """max|a| / (2π max|v|), Hz; 0 when v is zero."""
    vmax = float(np.max(np.abs(v)))
    return float(np.max(np.abs(a))) / (2 * np.pi * vmax) if vmax > 0.0 else 0.0


def comparison_grid(first: Run, samples: np.ndarray, n: int, linear_hz: float) -> Grid:
    """`step_grid` plus a uniform grid of POINTS_PER_PERIOD per period of the fastest frequency seen.

    The fastest frequency is the larger of the highest linearised frequency and
    `observed_frequency` on the step grid; the uniform part holds at most
    MAX_UNIFORM points (then `capped`).
    """
    base = step_grid(first, samples)
    observed = observed_frequency(base, first.dense(base), n)
    fastest, basis = (linear_hz, "linearised") if linear_hz >= observed else (observed, "observed")
    duration = float(samples[-1] - samples[0])
    wanted = int(np.ceil(POINTS_PER_PERIOD * fastest * duration)) + 1
    count = min(wanted, MAX_UNIFORM)
    uniform = np.linspace(samples[0], samples[-1], max(count, 2))
    return Grid(np.unique(np.concatenate([base, uniform])), float(fastest), basis, wanted > MAX_UNIFORM)


def _atol(y0: np.ndarray, atol: float) -> np.ndarray:
    return np.full(len(y0), atol)


def _safe(fn, *args):
    try:
        with np.errstate(all="raise"):
            return fn(*args)
    except (np.linalg.LinAlgError, FloatingPointError, ZeroDivisionError, OverflowError,
            ValueError) as exc:
        raise _RhsFailure(f"{type(exc).__name__} while evaluating the equations at t = {args[0]:.6g} s: {exc}") from None


def _run(method, rhs, y0, t_eval, spec: TimeHistorySpec, atol, dense: bool,
         tighten: float = 1.0, budget: int | None = None, switches: sw.Switches = sw.NONE) -> Run:
    """One solve_ivp run (one per segment with switches); stopped as a failure after `budget` evaluations."""
    counter = {"nfev": 0}

    def counted(t, y):
        if budget is not None and counter["nfev"] >= budget:
            raise _RhsFailure(f"stopped at t = {t:.6g} s after {budget} evaluations, the budget "
                              "of the independent run once the primary run has failed")
        counter["nfev"] += 1
        return rhs(t, y)

    rtol = max(spec.rtol * tighten, 1e-13)
    atol = atol * tighten
    if switches.any:
        return _segmented_run(method, counted, counter, y0, t_eval, spec, rtol, atol, dense, switches)
    try:
        sol = solve_ivp(counted, (0.0, spec.duration), y0, method=method, t_eval=t_eval,
                        rtol=rtol, atol=atol, dense_output=dense)
    except _RhsFailure as exc:
        return Run(SolverRun(method, False, -1, str(exc), counter["nfev"]), t_eval, np.zeros((len(y0), 0)))
    solver = SolverRun(method, bool(sol.success), int(sol.status), str(sol.message), int(sol.nfev))
    if not sol.success:
        return Run(solver, t_eval, np.zeros((len(y0), 0)))
    return Run(solver, sol.t, sol.y, sol.sol if dense else None)


def _segmented_run(method, counted, counter, y0, t_eval, spec: TimeHistorySpec, rtol, atol, dense: bool,
                   switches: sw.Switches) -> Run:
    """A run restarted at every explicit switching time, each step limited by the state switches."""
    edges = switches.edges(spec.duration)
    y, parts = np.asarray(y0, dtype=float), []
    try:
        for a, b in zip(edges[:-1], edges[1:]):
            fun = sw.inside(counted, a, b, spec.duration, switches.clamps)
            sol = sw.solve(fun, (a, b), y, method, switches.limit, rtol=rtol, atol=atol, dense_output=True)
            if not sol.success:
                solver = SolverRun(method, False, int(sol.status), str(sol.message), counter["nfev"])
                return Run(solver, t_eval, np.zeros((len(y0), 0)))
            parts.append(Phase(a, b, (), sol.sol))
            y = sol.y[:, -1]
    except _RhsFailure as exc:
        return Run(SolverRun(method, False, -1, str(exc), counter["nfev"]), t_eval, np.zeros((len(y0), 0)))
    whole = PiecewiseSolution(parts)
    limit = (f", each step limited by {switches.limit.count} state switch argument(s)"
             if switches.limit is not None else "")
    solver = SolverRun(method, True, 0, f"The solver successfully reached the end of the integration interval "
                       f"in {len(parts)} segment(s) between explicit switching times{limit}.", counter["nfev"])
    t_eval = np.asarray(t_eval, dtype=float)
    return Run(solver, t_eval, whole(t_eval), whole if dense else None)


def agreement(first: Run, second: Run, n: int) -> float:
    """Largest difference of q and q̇ between the runs on the second run's times, normalised per state.

    The primary run is read from its dense output at those times.  Each state
    is scaled by its largest value, floored at 1e-3 of the largest value among
    states of its kind (positions, velocities), so a state held nearly constant
    by a constraint does not divide by round-off.
    """
    a, b = first.dense(second.t)[:2 * n], second.y[:2 * n]
    peaks = np.max(np.abs(a), axis=1)
    worst = 0.0
    for i in range(2 * n):
        kind = peaks[:n] if i < n else peaks[n:]
        scale = max(float(peaks[i]), 1e-3 * float(np.max(kind)), 1e-12)
        worst = max(worst, float(np.max(np.abs(a[i] - b[i]))) / scale)
    return worst
