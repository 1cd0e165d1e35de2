"""Lagrange's equations with dissipation, generalized and point forces.

For each coordinate q_j:  d/dt(∂L/∂q̇_j) − ∂L/∂q_j + ∂R/∂q̇_j = Q_j,  L = T − V.
The system form is M(q, t) q̈ = f(q, q̇, t) + Gᵀλ with M the Hessian of T in the
velocities, and f = Q + ∂L/∂q − ∂R/∂q̇ − (∂²L/∂q̇∂q) q̇ − ∂²L/∂q̇∂t, formed
without expanding d/dt(∂L/∂q̇) and never simplified (fast for large systems).
Constraints g(q, t) = 0 give the Gᵀλ term, with G = ∂g/∂q and
G q̈ = γ, γ = −(∂(G q̇ + g_t)/∂q · q̇ + ∂(G q̇ + g_t)/∂t).

Derivatives of abs(), sign() and step() are taken almost everywhere: sympy's
DiracDelta terms are dropped (d|v|/dv = sign v, d step(x)/dx = 0), so a
one-sided spring k/2 x² step(x) gives the force −k x step(x).
"""

from __future__ import annotations

from dataclasses import dataclass

import sympy as sp

from ..calcfile.expressions import TIME, acceleration, symbol, velocity
from ..calcfile.spec import CalcSpec
from ..model import Step


def diff_ae(expr, *variables):
    """∂expr/∂variables almost everywhere: DiracDelta terms of non-smooth functions dropped."""
    result = sp.diff(expr, *variables)
    return result.replace(sp.DiracDelta, lambda *args: sp.S.Zero) if result.has(sp.DiracDelta) else result


def jacobian_ae(column: sp.Matrix, variables) -> sp.Matrix:
    """Jacobian of a column of expressions, almost everywhere (see diff_ae)."""
    return sp.Matrix(column.rows, len(variables), lambda i, j: diff_ae(column[i], variables[j]))


@dataclass(frozen=True)
class Derivation:
    q: tuple[sp.Symbol, ...]
    qd: tuple[sp.Symbol, ...]
    qdd: tuple[sp.Symbol, ...]
    T: sp.Expr
    V: sp.Expr
    R: sp.Expr
    L: sp.Expr
    Q: sp.Matrix                 # generalized forces incl. point forces (n×1)
    M: sp.Matrix                 # mass matrix (n×n)
    f: sp.Matrix                 # right-hand side without constraint forces (n×1)
    g: sp.Matrix                 # constraint functions (m×1)
    G: sp.Matrix                 # constraint Jacobian ∂g/∂q (m×n)
    gamma: sp.Matrix             # G q̈ = gamma (m×1)
    lambdas: tuple[sp.Symbol, ...]
    steps: tuple[Step, ...]
    equations: tuple[Step, ...]

    @property
    def energy_function(self) -> sp.Expr:
        """h = Σ q̇_j ∂L/∂q̇_j − L (the Jacobi integral)."""
        return sum((v * diff_ae(self.L, v) for v in self.qd), sp.Integer(0)) - self.L

    @property
    def dissipated_power(self) -> sp.Expr:
        """q̇·∂R/∂q̇ (equals n R when R is homogeneous of degree n in q̇)."""
        return sum((v * diff_ae(self.R, v) for v in self.qd), sp.Integer(0))

    @property
    def input_power(self) -> sp.Expr:
        """Q·q̇, the power of the generalized and point forces."""
        return sum((Qj * v for Qj, v in zip(self.Q, self.qd)), sp.Integer(0))

    @property
    def explicit_time_rate(self) -> sp.Expr:
        """∂L/∂t at fixed q, q̇."""
        return diff_ae(self.L, TIME)


def point_force_Q(spec: CalcSpec, q: tuple[sp.Symbol, ...]) -> list[sp.Expr]:
    """Q_j = Σ_k F_k · ∂r_k/∂q_j by virtual work."""
    out = []
    for qj in q:
        total = sp.Integer(0)
        for pf in spec.point_forces:
            total += sum((F * diff_ae(r, qj) for F, r in zip(pf.force, pf.position)), sp.Integer(0))
        out.append(total)
    return out


def derive(spec: CalcSpec) -> Derivation:
    """Form the equations of motion of `spec`, keeping every step as data."""
    names = spec.coordinate_names
    q = tuple(symbol(n) for n in names)
    qd = tuple(velocity(n) for n in names)
    qdd = tuple(acceleration(n) for n in names)
    T, V, R = spec.kinetic, spec.potential, spec.dissipation
    L = T - V
    given = dict(spec.generalized_forces)
    from_points = point_force_Q(spec, q)
    Q = sp.Matrix([given.get(n, sp.Integer(0)) + p for n, p in zip(names, from_points)])

    dL_dqd = [diff_ae(L, v) for v in qd]
    dL_dq = [diff_ae(L, c) for c in q]
    dR_dqd = [diff_ae(R, v) for v in qd]
    M = sp.Matrix(len(q), len(q), lambda i, j: diff_ae(dL_dqd[i], qd[j]))
    rest = [sum((diff_ae(p, c) * v for c, v in zip(q, qd)), sp.Integer(0)) + diff_ae(p, TIME)
            for p in dL_dqd]
    f = sp.Matrix([Q[i] + dL_dq[i] - dR_dqd[i] - rest[i] for i in range(len(q))])

    g = sp.Matrix([c.equation for c in spec.constraints])
    lambdas = tuple(symbol(c.name) for c in spec.constraints)
    if g.rows:
        G = jacobian_ae(g, q)
        velocity_constraint = G * sp.Matrix(qd) + g.applyfunc(lambda e: diff_ae(e, TIME))
        gamma = -(jacobian_ae(velocity_constraint, q) * sp.Matrix(qd)
                  + velocity_constraint.applyfunc(lambda e: diff_ae(e, TIME)))
    else:
        G = sp.zeros(0, len(q))
        gamma = sp.zeros(0, 1)

    steps, equations = _steps(names, q, qd, qdd, L, M, dL_dqd, dL_dq, dR_dqd, Q, rest, G, lambdas, g)
    return Derivation(q=q, qd=qd, qdd=qdd, T=T, V=V, R=R, L=L, Q=Q, M=M, f=f, g=g, G=G,
                      gamma=gamma, lambdas=lambdas, steps=steps, equations=equations)


def _steps(names, q, qd, qdd, L, M, dL_dqd, dL_dq, dR_dqd, Q, rest, G, lambdas, g):
    steps = [Step("Lagrangian", "L = T - V", L)]
    equations = []
    for i, name in enumerate(names):
        s = _latex_name(name)
        ddt = sum((M[i, k] * qdd[k] for k in range(len(q))), sp.Integer(0)) + rest[i]
        steps += [
            Step(f"Momentum conjugate to {name}", rf"\frac{{\partial L}}{{\partial \dot{{{s}}}}}", dL_dqd[i], name),
            Step("Its time derivative", rf"\frac{{d}}{{dt}}\frac{{\partial L}}{{\partial \dot{{{s}}}}}", ddt, name),
            Step(f"Partial of L with respect to {name}", rf"\frac{{\partial L}}{{\partial {s}}}", dL_dq[i], name),
            Step("Dissipation term", rf"\frac{{\partial R}}{{\partial \dot{{{s}}}}}", dR_dqd[i], name),
            Step(f"Generalized force on {name}", rf"Q_{{{s}}}", Q[i], name),
        ]
        constraint = sum((G[r, i] * lam for r, lam in enumerate(lambdas)), sp.Integer(0))
        lhs = ddt - dL_dq[i] + dR_dqd[i]
        equations.append(Step(f"Equation of motion for {name}", "0", lhs - Q[i] - constraint, name))
    steps.append(Step("Mass matrix (Hessian of T in the velocities)", "M", M))
    for lam, equation in zip(lambdas, g):
        # The force of a constraint enters each equation as λ ∂g/∂q_j (the Gᵀλ term):
        # positive λ pushes the coordinates towards increasing g.
        steps.append(Step(f"Constraint g = 0 whose force is {lam} (acting as {lam}·∂g/∂q on each "
                          f"coordinate; positive {lam} pushes towards increasing g)",
                          rf"g_{{{_latex_name(str(lam))}}}", equation))
    return tuple(steps), tuple(equations)


def _latex_name(name: str) -> str:
    return sp.latex(sp.Symbol(name))
