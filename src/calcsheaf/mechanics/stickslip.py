"""Coulomb friction that sticks: sign(s) terms of the equations as sliding and stuck phases.

A term F·sign(s) with s(t, q, q̇) a slip velocity (Coulomb friction written as
R = F·|v| or as a force −F·sign(v)) makes the equations discontinuous at
s = 0.  Integrated as written, the integrator chatters about s = 0 from the
instant the parts should stick until it gives up.  Instead each sign(s_j) is
replaced by a number σ_j (Filippov's convex method, equivalent control):

- sliding, σ_j = ±1, the side s_j is on; an event ends the phase where s_j
  reaches zero;
- stuck, σ_j chosen so that ṡ_j = 0 (the friction force is what holds the
  parts together), possible while |σ_j| ≤ 1, i.e. while the force needed is at
  most the friction force; events end the phase where σ_j reaches ±1
  (break-away in that direction).

At s_j = 0 the parts stick when friction pushes s_j back towards zero from
both sides (ṡ_j(σ_j = +1) < 0 < ṡ_j(σ_j = −1)); otherwise they slide on in
the direction of ṡ_j.  The equations must be affine in each sign term (every
friction law of the form F·sign(s) is); otherwise the calc is integrated as
written.  On sticking, a slip velocity that is one coordinate's velocity is
set exactly to zero.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import sympy as sp

from ..calcfile.expressions import TIME
from .codegen import numeric
from .lagrange import Derivation, diff_ae

STUCK = 0


def slip_terms(derivation: Derivation) -> tuple[sp.Expr, ...]:
    """The sign(s) nodes of the equations and powers whose argument s depends on a velocity."""
    d = derivation
    found: list[sp.Expr] = []
    sources = [*d.f, d.dissipated_power, d.input_power]
    for source in sources:
        for node in sp.preorder_traversal(source):
            if isinstance(node, sp.sign) and node.args[0].has(*d.qd) and node not in found:
                found.append(node)
    return tuple(sorted(found, key=sp.default_sort_key))


def affine_in(terms, derivation: Derivation, sigma) -> bool:
    """True when f is affine in every σ_j once sign(s_j) → σ_j."""
    rep = dict(zip(terms, sigma))
    f = derivation.f.xreplace(rep)
    return all(sp.simplify(diff_ae(e, s, 2)) == 0 for e in f for s in sigma)


@dataclass(frozen=True)
class Phase:
    """One phase of the motion: [t0, t1] with fixed σ_j = ±1 or STUCK for each slip term."""
    t0: float
    t1: float
    mode: tuple[int, ...]
    solution: object              # OdeSolution of the phase


class StickSlip:
    """The equations with each slip term sign(s_j) replaced by σ_j; modes and events."""

    def __init__(self, derivation: Derivation, params: dict[str, float], terms) -> None:
        d = derivation
        self.n, self.m = len(d.q), len(d.lambdas)
        self.terms = tuple(terms)
        self.sigma = tuple(sp.Dummy(f"sigma{j}", real=True) for j in range(len(terms)))
        rep = dict(zip(self.terms, self.sigma))
        args = [TIME, *d.q, *d.qd, *self.sigma]
        exprs = [numeric(e.xreplace(rep), params) for e in (*d.M, *d.f, *d.G, *d.gamma)]
        self._system = sp.lambdify(args, exprs, modules="math", cse=True)
        slips = [t.args[0] for t in self.terms]
        self._slip = sp.lambdify([TIME, *d.q, *d.qd], [numeric(s, params) for s in slips],
                                 modules="math", cse=True)
        rates = [diff_ae(s, TIME) + sum(diff_ae(s, q) * v for q, v in zip(d.q, d.qd))
                 + sum(diff_ae(s, v) * a for v, a in zip(d.qd, d.qdd)) for s in slips]
        self._rate = sp.lambdify([TIME, *d.q, *d.qd, *d.qdd], [numeric(r, params) for r in rates],
                                 modules="math", cse=True)
        constraint_power = sp.Integer(0)
        if d.lambdas:
            constraint_power = (sp.Matrix(d.lambdas).T * d.G * sp.Matrix(d.qd))[0]
        powers = [d.dissipated_power, d.input_power - d.explicit_time_rate + constraint_power]
        self._powers = sp.lambdify([TIME, *d.q, *d.qd, *d.lambdas, *self.sigma],
                                   [numeric(p.xreplace(rep), params) for p in powers], modules="math", cse=True)
        self._zeroable = [self._single_velocity(numeric(s, params), d) for s in slips]

    @staticmethod
    def _single_velocity(slip: sp.Expr, d: Derivation) -> int | None:
        """Index i when the slip velocity (parameters substituted) is c·q̇_i, else None."""
        for i, v in enumerate(d.qd):
            if slip.free_symbols == {v} and sp.diff(slip, v, 2) == 0 and slip.subs(v, 0) == 0:
                return i
        return None

    # ---- the equations at one state ----------------------------------------------
    def solve(self, t: float, q, qd, sigma) -> tuple[np.ndarray, np.ndarray]:
        """q̈ and λ with the slip terms set to `sigma`."""
        n, m = self.n, self.m
        flat = self._system(t, *q, *qd, *sigma)
        M = np.array(flat[:n * n], dtype=float).reshape(n, n)
        f = np.array(flat[n * n:n * n + n], dtype=float)
        if not m:
            return np.linalg.solve(M, f), np.zeros(0)
        G = np.array(flat[n * n + n:n * n + n + m * n], dtype=float).reshape(m, n)
        gamma = np.array(flat[n * n + n + m * n:], dtype=float)
        A = np.zeros((n + m, n + m))
        A[:n, :n], A[:n, n:], A[n:, :n] = M, -G.T, G
        x = np.linalg.solve(A, np.concatenate([f, gamma]))
        return x[:n], x[n:]

    def slip(self, t: float, q, qd) -> np.ndarray:
        return np.array(self._slip(t, *q, *qd), dtype=float)

    def slip_rate(self, t: float, q, qd, sigma) -> np.ndarray:
        qdd, _ = self.solve(t, q, qd, sigma)
        return np.array(self._rate(t, *q, *qd, *qdd), dtype=float)

    def sigma_of(self, t: float, q, qd, mode) -> np.ndarray:
        """σ of a mode: ±1 where sliding; where stuck, the values that keep ṡ = 0 (ṡ is affine in σ)."""
        sigma = np.array(mode, dtype=float)
        stuck = [j for j, s in enumerate(mode) if s == STUCK]
        if not stuck:
            return sigma
        base = self.slip_rate(t, q, qd, sigma)[stuck]
        J = np.zeros((len(stuck), len(stuck)))
        for col, j in enumerate(stuck):
            trial = sigma.copy()
            trial[j] = 1.0
            J[:, col] = self.slip_rate(t, q, qd, trial)[stuck] - base
        sigma[stuck] = np.linalg.lstsq(J, -base, rcond=None)[0]
        return sigma

    def accelerations(self, t: float, q, qd, mode) -> tuple[np.ndarray, np.ndarray]:
        return self.solve(t, q, qd, self.sigma_of(t, q, qd, mode))

    def powers(self, t: float, q, qd, lam, sigma) -> tuple[float, float]:
        return tuple(self._powers(t, *q, *qd, *lam, *sigma))

    # ---- phases ---------------------------------------------------------------------
    def mode_at_rest(self, t: float, q, qd, mode, j: int) -> int:
        """The mode of slip term j once its slip velocity is zero: stuck, or sliding on to ±1."""
        trial = np.array(self.sigma_of(t, q, qd, mode), dtype=float)
        trial[j] = 1.0
        up = self.slip_rate(t, q, qd, trial)[j]
        trial[j] = -1.0
        down = self.slip_rate(t, q, qd, trial)[j]
        if up < 0.0 < down:
            return STUCK
        if up >= 0.0 and down >= 0.0:
            return 1 if up > 0.0 or down > 0.0 else STUCK
        if up <= 0.0 and down <= 0.0:
            return -1
        return STUCK                  # friction that repels from both sides: hold at rest

    def initial_mode(self, t: float, q, qd, scale: np.ndarray) -> tuple[int, ...]:
        """σ from the sign of each slip velocity; at rest (|s| ≤ scale), stuck or sliding."""
        s = self.slip(t, q, qd)
        mode = [int(np.sign(v)) if abs(v) > scale[j] else STUCK for j, v in enumerate(s)]
        for j, v in enumerate(s):
            if abs(v) <= scale[j]:
                mode[j] = self.mode_at_rest(t, q, qd, tuple(mode), j)
        return tuple(mode)

    def stick(self, y: np.ndarray, mode, j: int) -> np.ndarray:
        """The state on sticking of term j: a slip velocity that is one coordinate's set to zero."""
        i = self._zeroable[j]
        if mode[j] != STUCK or i is None:
            return y
        y = y.copy()
        y[self.n + i] = 0.0
        return y
