"""The query functions of results, criteria and crosscheck comparisons.

A query expression is a sympy expression whose query applications
(query_peak(...), ...) are evaluated against the calc's analyses; the rest is
ordinary arithmetic on parameters and earlier results.  Every value is SI:
frequencies in Hz, times in s, mode numbers 1-based.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from types import SimpleNamespace
from typing import Any

import numpy as np
import sympy as sp
from scipy import optimize
from scipy.linalg import eigh as scipy_eigh

from ..calcfile.expressions import query_name, symbol
from ..errors import AnalysisError
from ..mechanics import frequency
from ..mechanics.codegen import numeric, series_function
from ..mechanics.lagrange import diff_ae
from .extremes import Extremes, extremes as find_extremes, switching_times

SWITCHES = (sp.Heaviside, sp.sign, sp.Abs)


@dataclass
class History:
    """A record of the motion at times t (SI); Q, QD, QDD are (n, N), LAM is (m, N)."""
    t: np.ndarray
    Q: np.ndarray
    QD: np.ndarray
    QDD: np.ndarray
    LAM: np.ndarray
    dense: Any = None             # OdeSolution of [q, q̇, ...]
    grid: np.ndarray | None = None   # times at which the dense solution is examined (extremes)
    accelerations: Any = None     # (t, q, q̇) -> q̈, λ along this motion (stick-slip phases)
    friction: Any = None          # Friction of a stick-slip run, else None
    SIG: np.ndarray | None = None   # (terms, N) values σ_j standing for the Coulomb terms sign(s_j)


@dataclass(frozen=True)
class Friction:
    """The Coulomb terms sign(s_j) of a stick-slip run and σ_j(t, q, q̇) along it (±1 sliding, |σ| ≤ 1 stuck)."""
    terms: tuple
    sigma: Any


@dataclass
class QueryContext:
    spec: Any
    derivation: Any
    params: dict[str, float]
    history: History | None = None
    equilibrium: dict[str, float] | None = None
    equilibrium_kind: str = ""               # mechanics.equilibrium STATIC, STEADY or FROZEN
    modes: tuple = ()
    linear: Any = None
    force: np.ndarray | None = None          # FRF generalized-force amplitudes
    freqs: np.ndarray | None = None
    linear_point: np.ndarray | None = None   # coordinates the linear model is taken about
    system: Any = None                       # NumericSystem, for states between samples
    values: dict[str, float] = field(default_factory=dict)   # results so far (SI)
    _fine: History | None = field(default=None, repr=False)
    _functions: dict = field(default_factory=dict, repr=False)
    _extremes: dict = field(default_factory=dict, repr=False)

    def evaluate(self, expr: sp.Expr, key: str) -> float:
        """SI value of a query expression; AnalysisError naming `key` when impossible."""
        self.key = key
        replaced = expr.replace(lambda e: query_name(e.func) is not None,
                                lambda e: sp.Float(self._query(query_name(e.func), e.args)))
        known = {**self.params, **self.values}
        value = numeric(replaced, known)
        try:
            number = complex(value.evalf())
        except (TypeError, ValueError):
            raise self._fail(f"cannot evaluate '{sp.sstr(expr)}' to a number", "check the names used")
        if abs(number.imag) > 1e-12 * max(1.0, abs(number.real)) or not np.isfinite(number.real):
            raise self._fail(f"'{sp.sstr(expr)}' is not a finite real number ({number})",
                             "check the expression and the analyses it queries")
        return float(number.real)

    def _fail(self, problem: str, fix: str) -> AnalysisError:
        return AnalysisError(problem, file=str(self.spec.path), line=self.spec.line(self.key),
                             key=self.key, fix=fix)

    # ---- dispatch ------------------------------------------------------------
    def _query(self, name: str, args) -> float:
        if name in ("natural_frequency", "damping_ratio", "damped_frequency"):
            return self._mode(name, int(args[0]))
        if name == "undamped_frequency":
            return self._undamped(int(args[0]))
        if name == "equilibrium":
            if self.equilibrium is None:
                raise self._fail("equilibrium() needs the static equilibrium",
                                 "set [analysis] equilibrium = true")
            return self.equilibrium[str(args[0])]
        if name.startswith("frf"):
            return self._frf(name, args)
        history = self._history(name)
        if name in ("period", "log_decrement"):
            return self._oscillation(name, str(args[0]), history)
        if name in ("peak", "max", "min"):
            found = self.extremes(args[0])
            return {"peak": found.peak, "max": found.max, "min": found.min}[name]
        if name in ("initial", "final"):
            return float(self.series(args[0])[0 if name == "initial" else -1])
        if name in ("mean", "rms"):
            fine = self.fine()
            values, t = self.series(args[0], fine), fine.t
            if name == "mean":
                return float(np.trapezoid(values, t) / (t[-1] - t[0]))
            return float(np.sqrt(np.trapezoid(values ** 2, t) / (t[-1] - t[0])))
        if name == "at":
            t = history.t
            when = float(numeric(args[1], self.params))
            if not t[0] <= when <= t[-1]:
                raise self._fail(f"at() time {when} s is outside the time history 0..{t[-1]:g} s",
                                 "give a time inside [time_history] duration")
            if history.dense is None or self.system is None:
                return float(np.interp(when, t, self.series(args[0])))
            return float(self.series(args[0], self._instant(when))[0])
        raise self._fail(f"unknown query {name}()", "see the list of query functions")

    def _history(self, name: str) -> History:
        if self.history is None:
            raise self._fail(f"{name}() needs a time history, which this calc did not produce",
                             "add a [time_history] table (or fix the integration failure shown)")
        return self.history

    def _instant(self, when: float) -> History:
        """The state at one time from the dense solution (exact to integrator accuracy)."""
        return self.states(np.array([when], dtype=float))

    def states(self, times: np.ndarray) -> History:
        """The motion at any times from the dense solution; q̈ and λ from the equations there."""
        n, m = self.system.n, self.system.m
        y = np.asarray(self.history.dense(times), dtype=float).reshape(-1, len(times))
        Q, QD = y[:n], y[n:2 * n]
        QDD, LAM = np.zeros_like(Q), np.zeros((m, len(times)))
        accelerations = self.history.accelerations or self.system.accelerations
        for k, tk in enumerate(times):
            QDD[:, k], LAM[:, k] = accelerations(float(tk), Q[:, k], QD[:, k])
        friction = self.history.friction
        return History(t=np.asarray(times, dtype=float), Q=Q, QD=QD, QDD=QDD, LAM=LAM, friction=friction,
                       SIG=friction_values(friction, times, Q, QD))

    def fine(self) -> History:
        """The motion on the history's fine grid (the samples when there is no dense solution)."""
        h = self.history
        if h.dense is None or h.grid is None or self.system is None:
            return h
        if self._fine is None:
            self._fine = self.states(h.grid)
        return self._fine

    def series(self, expr: sp.Expr, history: History | None = None) -> np.ndarray:
        """Values of a time-history expression at the history's samples.

        In a stick-slip run each Coulomb term sign(s_j) reads σ_j, so a friction
        force written with sign() shows the holding force while stuck.
        """
        h = history or self.history
        fn, with_sigma = self._function(expr)
        LAM = np.vstack([h.LAM, h.SIG]) if with_sigma else h.LAM
        return fn(h.t, h.Q, h.QD, h.QDD, LAM)

    def _function(self, expr: sp.Expr):
        """(vectorised series function, reads σ) of an expression (outputs substituted), generated once."""
        if expr not in self._functions:
            full = self._expanded(expr)
            friction = self.history.friction if self.history is not None else None
            terms = [t for t in (friction.terms if friction else ()) if full.has(t)]
            if terms:
                d = self.derivation
                sigma = [sp.Dummy(f"sigma{j}", real=True) for j in range(len(friction.terms))]
                full = full.xreplace(dict(zip(friction.terms, sigma)))
                # σ_j ride along as extra multipliers: the series function's last arguments.
                carrier = SimpleNamespace(q=d.q, qd=d.qd, qdd=d.qdd, lambdas=(*d.lambdas, *sigma))
                self._functions[expr] = (series_function(full, carrier, self.params), True)
            else:
                self._functions[expr] = (series_function(full, self.derivation, self.params), False)
        return self._functions[expr]

    def extremes(self, expr: sp.Expr) -> Extremes:
        """Max and min of a time-history expression over the dense solution (see verification.extremes)."""
        if expr in self._extremes:
            return self._extremes[expr]
        fine = self.fine()
        values = self.series(expr, fine)
        if fine is self.history:              # no dense solution to examine: the samples
            value_at = lambda s: float(np.interp(s, fine.t, values))
            switches = []
        else:
            value_at = lambda s: float(self.series(expr, self._instant(s))[0])
            switches = self.switches(expr)
        found = find_extremes(fine.t, values, value_at, switches)
        self._extremes[expr] = found
        return found

    def switches(self, expr: sp.Expr) -> list[float]:
        """Times where a step, sign, abs, min or max argument of `expr` or of the equations changes sign."""
        fine = self.fine()
        arguments = switch_arguments(self._expanded(expr), self.derivation)
        values = [self.series(a, fine) for a in arguments]
        at = lambda j, s: float(self.series(arguments[j], self._instant(s))[0])
        return switching_times(fine.t, values, at)

    def _expanded(self, expr: sp.Expr) -> sp.Expr:
        outputs = {symbol(o.name): o.expr for o in self.spec.outputs}
        return expr.xreplace(outputs)

    def _mode(self, name: str, index: int) -> float:
        if not self.modes:
            raise self._fail(f"{name}({index}) needs the modes", "set [analysis] modes = true "
                             "and equilibrium = true")
        if index > len(self.modes):
            raise self._fail(f"mode {index} does not exist: the calc has {len(self.modes)} mode(s)",
                             f"ask for a mode between 1 and {len(self.modes)}")
        mode = self.modes[index - 1]
        value = {"natural_frequency": mode.natural_frequency_hz, "damping_ratio": mode.damping_ratio,
                 "damped_frequency": mode.damped_frequency_hz}[name]
        if np.isfinite(value):
            return value
        if mode.kind == "unstable":
            raise self._fail(f"{name}({index}) is not defined: mode {index} is unstable and grows "
                             f"without oscillating (growth rate {mode.growth_rate_per_s:.4g} 1/s, "
                             f"doubling time {mode.doubling_time_s:.4g} s)",
                             "stabilise the design, or query another mode")
        raise self._fail(f"{name}({index}) is not defined for mode {index} ({mode.kind})",
                         "query another mode")

    def _undamped(self, index: int) -> float:
        """Hz: the index-th frequency of K φ = ω² M φ (damping and skew parts left out),
        ascending; not paired with the damped modes."""
        if self.linear is None:
            raise self._fail(f"undamped_frequency({index}) needs the linearised system",
                             "set [analysis] modes = true and equilibrium = true")
        K, M = (self.linear.S + self.linear.S.T) / 2, self.linear.M
        w2 = scipy_eigh(K, M, eigvals_only=True) if M.size else np.zeros(0)
        if not 1 <= index <= len(w2):
            raise self._fail(f"mode {index} does not exist: the calc has {len(w2)} mode(s)",
                             f"ask for a mode between 1 and {len(w2)}")
        value = float(w2[index - 1])
        if value < -1e-9 * max(1.0, float(np.max(np.abs(w2)))):
            raise self._fail(f"undamped_frequency({index}) is not defined: the stiffness is negative "
                             "in that direction (unstable)", "query another mode")
        return float(np.sqrt(max(value, 0.0))) / (2 * np.pi)

    # ---- oscillation measures --------------------------------------------------
    def _oscillation(self, name: str, coordinate: str, history: History) -> float:
        """period (s) or log_decrement (1) of a coordinate, measured about its level (`_level`).

        period: mean spacing of the upward crossings of the level; log_decrement:
        ln(a_first / a_last) / (count − 1) over the maxima above the level (q̇ = 0).
        Crossings are bracketed on the fine grid and refined on the dense solution.
        """
        i = self.spec.coordinate_names.index(coordinate)
        fine = self.fine()
        centre, basis = self._level(coordinate, i, history, fine)
        if name == "period":
            times = self._crossings(lambda t: history.dense(t)[i] - centre, fine.Q[i] - centre, fine.t,
                                    history.dense is not None)
            if len(times) < 2:
                raise self._fail(f"period({coordinate}) needs at least two upward crossings of "
                                 f"{basis} in the time history", "lengthen [time_history] duration")
            return float((times[-1] - times[0]) / (len(times) - 1))
        peaks = [x - centre for _, x in self._turning_points(i, history, fine, maxima=True)]
        peaks = [p for p in peaks if p > 0]
        if len(peaks) < 2:
            raise self._fail(f"log_decrement({coordinate}) needs at least two peaks above {basis}",
                             "lengthen [time_history] duration or check the damping")
        return float(np.log(peaks[0] / peaks[-1]) / (len(peaks) - 1))

    def _level(self, coordinate: str, i: int, history: History, fine: History) -> tuple[float, str]:
        """(SI level, description) about which the coordinate oscillates.

        The equilibrium when it does not depend on time (static or steady motion).  When
        the loads vary in time (a time-frozen equilibrium, e.g. a load switched on at
        t1 > 0) or no equilibrium was computed, the level of the last oscillation: from
        its last three turning points x1, x2, x3 (maximum, minimum, maximum or the
        reverse), c = (x1 x3 − x2²)/(x1 + x3 − 2 x2), exact for a linear viscously damped
        oscillation about c (x − c = A e^(−ζωt) cos(ω_d t − φ) makes x1 − c, x2 − c, x3 − c
        geometric); the mean of the record when there are fewer than three.
        """
        if self.equilibrium is not None and self.equilibrium_kind in ("static", "steady motion"):
            return self.equilibrium[coordinate], "its equilibrium"
        turns = sorted(self._turning_points(i, history, fine, maxima=True)
                       + self._turning_points(i, history, fine, maxima=False))
        if len(turns) >= 3:
            x1, x2, x3 = (x for _, x in turns[-3:])
            denominator = x1 + x3 - 2 * x2
            if denominator != 0:
                return (x1 * x3 - x2 * x2) / denominator, "the level of its last oscillation"
        return float(np.mean(history.Q[i])), "its mean position"

    def _turning_points(self, i: int, history: History, fine: History, maxima: bool) -> list:
        """[(t, q_i(t))] where q̇_i crosses zero downwards (maxima) or upwards (minima)."""
        n, dense = len(self.spec.coordinate_names), history.dense is not None
        sign = -1.0 if maxima else 1.0
        times = self._crossings(lambda t: sign * history.dense(t)[n + i], sign * fine.QD[i], fine.t, dense)
        if dense:
            return [(t, float(history.dense(t)[i])) for t in times]
        return [(t, float(np.interp(t, fine.t, fine.Q[i]))) for t in times]

    @staticmethod
    def _crossings(fn, sampled: np.ndarray, t: np.ndarray, dense: bool) -> list[float]:
        """Times where `fn` crosses zero upwards between grid times `t`, refined on the dense solution."""
        idx = np.nonzero((sampled[:-1] < 0) & (sampled[1:] >= 0))[0]
        out = []
        for k in idx:
            a, b = t[k], t[k + 1]
            if not dense or fn(a) * fn(b) > 0:
                out.append(float(a - sampled[k] * (b - a) / (sampled[k + 1] - sampled[k])))
            else:
                out.append(float(optimize.brentq(fn, a, b, xtol=1e-14, rtol=1e-14)))
        return out

    # ---- frequency response ------------------------------------------------------
    def _frf(self, name: str, args) -> float:
        if self.linear is None or self.force is None:
            raise self._fail(f"{name}() needs a [frequency_response] table and the equilibrium",
                             "add [frequency_response] with force, from and to")
        target = str(args[0])
        amplitude_at = self.amplitude_function(target)
        if name == "frf":
            return amplitude_at(float(numeric(args[1], self.params)))
        values = np.array([amplitude_at(f) for f in self.freqs])
        best, where = frequency.peak(amplitude_at, self.freqs, values, frequency.resonances(self.linear))
        return best if name == "frf_peak" else where

    def amplitude_function(self, target: str):
        """f_hz -> amplitude of a coordinate or a linearised output."""
        names = self.spec.coordinate_names
        if target in names:
            i = names.index(target)
            return lambda f: float(abs(frequency.response(self.linear, self.force, f)[i]))
        gains = output_gains(self, target)
        if gains is None:
            raise self._fail(f"'{target}' depends on time or a constraint force, so it has no "
                             "linear frequency response", "query a coordinate or a plain output")
        a, b, c = gains

        def amplitude(f):
            return float(abs(complex_output(f)))

        def complex_output(f):
            w = 2 * np.pi * f
            X = frequency.response(self.linear, self.force, f)
            return complex(a @ X + 1j * w * (b @ X) - w * w * (c @ X))
        amplitude.complex = complex_output
        return amplitude


def output_gains(ctx: QueryContext, name: str):
    """∂o/∂q, ∂o/∂q̇, ∂o/∂q̈ of an output at the equilibrium, or None when not linearisable."""
    d = ctx.derivation
    output = next(o for o in ctx.spec.outputs if o.name == name)
    expr = output.expr
    if expr.has(sp.Symbol("t", real=True)) or any(expr.has(l) for l in d.lambdas):
        return None
    at = {**{str(s): v for s, v in zip(d.q, ctx.linear_point)}, **{str(s): 0.0 for s in (*d.qd, *d.qdd)}}
    values = []
    for group in (d.q, d.qd, d.qdd):
        values.append(np.array([float(numeric(diff_ae(expr, s), {**ctx.params, **at})) for s in group]))
    return tuple(values)


def friction_values(friction: Friction | None, times, Q, QD) -> np.ndarray | None:
    """σ_j of every Coulomb term at each time, (terms, N); None without stick-slip."""
    if friction is None:
        return None
    return np.array([friction.sigma(float(tk), Q[:, k], QD[:, k]) for k, tk in enumerate(times)],
                    dtype=float).reshape(len(times), len(friction.terms)).T


def switch_arguments(expr: sp.Expr, derivation) -> list[sp.Expr]:
    """Arguments whose sign change switches `expr`: of step, sign, abs (a − b for min, max).

    The equations of motion are included when `expr` reads accelerations or
    constraint forces, which jump where the equations switch.
    """
    d = derivation
    sources = [expr]
    if any(expr.has(s) for s in (*d.qdd, *d.lambdas)):
        sources += [*d.f, *d.gamma, *d.M]
    found = []
    for source in sources:
        for node in sp.preorder_traversal(source):
            if isinstance(node, SWITCHES):
                found.append(node.args[0])
            elif isinstance(node, (sp.Min, sp.Max)):
                found += [a - b for a, b in zip(node.args, node.args[1:])]
    unique = []
    for a in found:
        if a.free_symbols and a not in unique:
            unique.append(a)
    return unique
