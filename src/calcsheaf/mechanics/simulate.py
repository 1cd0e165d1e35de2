"""Time histories: DOP853 with the energy integrals, and an independent second integrator.

The primary run integrates y = [q, q̇, W_d, W_in] where Ẇ_d = q̇·∂R/∂q̇ is the
dissipated power and Ẇ_in = Q·q̇ − ∂L/∂t + λᵀG q̇ the power put in.  The second
run (LSODA by default, a different family) integrates [q, q̇] alone.  A failed
integration is data: status, message and evaluation count.  When the primary
run fails, the second run is given at most SECOND_RUN_BUDGET times the
primary's evaluations: enough to show whether another family gets through
(stiff equations), without grinding on towards a blow-up.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import sympy as sp
from scipy.integrate import solve_ivp

from ..calcfile.expressions import TIME
from ..calcfile.spec import TimeHistorySpec
from ..model import SolverRun
from .codegen import NumericSystem, numeric
from .lagrange import Derivation


SECOND_RUN_BUDGET = 2
MIN_BUDGET = 10_000
POINTS_PER_PERIOD = 20            # comparison grid: points per period of the fastest frequency seen
STEP_SUBDIVISIONS = 4             # comparison and extremes grid: parts of each primary step
MAX_UNIFORM = 200_000             # cap on the uniform part of the comparison grid


class _RhsFailure(Exception):
    pass


@dataclass
class Run:
    solver: SolverRun
    t: np.ndarray
    y: np.ndarray                 # (states, N); empty when the run failed
    dense: object = None          # OdeSolution of the primary run


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
              linear_hz: float = 0.0) -> tuple[Run, Run, Grid]:
    """Primary (DOP853 with energy integrals) and secondary runs over [0, duration].

    The primary run is stored at the user's samples with its dense output; the
    secondary run is evaluated on the comparison grid (see `comparison_grid`),
    which `agreement` compares with the primary's dense output.
    `linear_hz` is the highest linearised frequency (0 when unknown).
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
    first = _run("DOP853", primary_rhs, np.concatenate([y0, [0.0, 0.0]]), t_eval, spec,
                 np.concatenate([atol, [spec.atol, spec.atol]]), dense=True)
    grid = comparison_grid(first, t_eval, n, linear_hz) if first.solver.success else Grid(t_eval, 0.0, "", False)
    budget = None if first.solver.success else max(SECOND_RUN_BUDGET * first.solver.nfev, MIN_BUDGET)
    # The multistep check runs 100 times tighter: its error constant is larger.
    second = _run(spec.second_method, secondary_rhs, y0, grid.t, spec, atol, dense=False, tighten=1e-2,
                  budget=budget)
    return first, second, grid


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
    through an impact), so this grid sees what happens between samples.
    """
    ts = np.asarray(first.dense.ts, dtype=float)
    inner = ts[:-1, None] + np.diff(ts)[:, None] * (np.arange(1, STEP_SUBDIVISIONS) / STEP_SUBDIVISIONS)
    return np.unique(np.concatenate([samples, ts, inner.ravel()]))


def observed_frequency(t: np.ndarray, Y: np.ndarray, n: int) -> float:
    """Fastest frequency seen in a record of [q, q̇], Hz: max over coordinates of max|q̈| / (2π max|q̇|).

    For q = A sin ωt this is ω/2π exactly; through an impact on a stiff
    spring it is that spring's contact frequency.  q̈ from differences of q̇.
    """
    best = 0.0
    for i in range(n):
        v = Y[n + i]
        vmax = float(np.max(np.abs(v)))
        if vmax <= 0.0 or len(t) < 2:
            continue
        amax = float(np.max(np.abs(np.diff(v) / np.diff(t))))
        best = max(best, amax / (2 * np.pi * vmax))
    return best


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
         tighten: float = 1.0, budget: int | None = None) -> Run:
    """One solve_ivp run; stopped as a failure after `budget` evaluations when given."""
    counter = {"nfev": 0}

    def counted(t, y):
        if budget is not None and counter["nfev"] >= budget:
            raise _RhsFailure(f"stopped at t = {t:.6g} s after {budget} evaluations, the budget "
                              "of the independent run once the primary run has failed")
        counter["nfev"] += 1
        return rhs(t, y)

    rtol = max(spec.rtol * tighten, 1e-13)
    atol = atol * tighten
    try:
        sol = solve_ivp(counted, (0.0, spec.duration), y0, method=method, t_eval=t_eval,
                        rtol=rtol, atol=atol, dense_output=dense)
    except _RhsFailure as exc:
        return Run(SolverRun(method, False, -1, str(exc), counter["nfev"]), t_eval, np.zeros((len(y0), 0)))
    solver = SolverRun(method, bool(sol.success), int(sol.status), str(sol.message), int(sol.nfev))
    if not sol.success:
        return Run(solver, t_eval, np.zeros((len(y0), 0)))
    return Run(solver, sol.t, sol.y, sol.sol if dense else None)


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
