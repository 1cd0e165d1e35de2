"""Linearisation about the equilibrium and modal analysis.

M q̈ + (C + G) q̇ + (K + N) q = 0 about the rest state, with C, K symmetric and
G, N skew (gyroscopic, circulatory).  Constraints are removed by a null-space
basis of their Jacobian.  Undamped modes solve K φ = ω² M φ; damped modes are
the eigenvalues s of the first-order system; ω_n = |s|, ζ = −Re(s)/|s|.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.linalg as la
import sympy as sp

from ..calcfile.expressions import TIME
from ..errors import AnalysisError
from ..model import Linearisation, Mode
from .codegen import numeric
from .lagrange import Derivation, jacobian_ae

RIGID_TOL = 1e-9
ZERO_ROOT = 1e-6           # |s| below this times the largest |s| is a zero (rigid-body) root:
                           # a double zero root splits to about sqrt(machine eps) in floating point


@dataclass(frozen=True)
class Linear:
    """Reduced linear model plus the basis that maps it back to all coordinates."""
    full: Linearisation
    basis: np.ndarray          # n × r
    M: np.ndarray
    D: np.ndarray              # full velocity matrix C + G (reduced)
    S: np.ndarray              # full stiffness matrix K + N (reduced)


def linearise(derivation: Derivation, params: dict[str, float], q_eq: np.ndarray,
              lambdas: np.ndarray) -> Linear:
    d = derivation
    forcing = d.f + (d.G.T * sp.Matrix(d.lambdas) if d.lambdas else sp.zeros(len(d.q), 1))
    jac_q = jacobian_ae(forcing, d.q)
    jac_qd = jacobian_ae(forcing, d.qd)
    args = [TIME, *d.q, *d.qd, *d.lambdas]
    fn = sp.lambdify(args, [numeric(e, params) for e in (*d.M, *jac_q, *jac_qd, *d.G)],
                     modules="math", cse=True)
    n, m = len(d.q), len(d.lambdas)
    try:
        flat = np.array(fn(0.0, *q_eq, *np.zeros(n), *lambdas), dtype=float)
    except (ValueError, ArithmeticError) as exc:
        raise _not_linearisable(f"evaluating the derivatives raised {type(exc).__name__}: {exc}") from None
    if not np.all(np.isfinite(flat)):
        raise _not_linearisable("a derivative of the equations is not finite there")
    M = flat[:n * n].reshape(n, n)
    S = -flat[n * n:2 * n * n].reshape(n, n)
    D = -flat[2 * n * n:3 * n * n].reshape(n, n)
    Gc = flat[3 * n * n:].reshape(m, n)
    basis = la.null_space(Gc) if m else np.eye(n)
    sym = lambda A: (A + A.T) / 2
    skew = lambda A: (A - A.T) / 2
    full = Linearisation(coordinates=tuple(str(s) for s in d.q), M=M, C=sym(D), G=skew(D),
                         K=sym(S), N=skew(S))
    B = basis
    return Linear(full=full, basis=B, M=B.T @ M @ B, D=B.T @ D @ B, S=B.T @ S @ B)


def _not_linearisable(why: str) -> AnalysisError:
    return AnalysisError(f"the equations cannot be linearised at the equilibrium: {why} "
                         "(e.g. a non-smooth or infinitely stiff term)", key="analysis.modes",
                         fix="set [analysis] modes = false, or smooth the offending term")


def stability(linear: Linear) -> tuple[bool, str]:
    """Stable when no root of the linearised system grows; for symmetric systems this needs a
    positive (semi-)definite stiffness, with gyroscopic coupling it may hold without one."""
    K = (linear.S + linear.S.T) / 2
    eig = np.linalg.eigvalsh(K) if K.size else np.zeros(0)
    scale = max(1.0, float(np.max(np.abs(eig)))) if eig.size else 1.0
    roots = _state_roots(linear)
    growing = [s for s in _nonzero(roots) if s.real > 1e-9 * max(1.0, abs(s))]
    negative = bool(eig.size and eig.min() < -RIGID_TOL * scale)
    if negative and not _has_skew_parts(linear):
        return False, "unstable: the stiffness at the equilibrium has a negative eigenvalue"
    if growing:
        return False, "unstable: a root of the linearised system has a positive real part"
    if negative:
        return True, ("stable by gyroscopic coupling: no root of the linearised system grows although "
                      "the stiffness has a negative eigenvalue (damping may destabilise it)")
    if eig.size and eig.min() <= RIGID_TOL * scale:
        return True, "neutrally stable: zero stiffness in at least one direction (rigid-body mode)"
    return True, "stable: stiffness positive definite at the equilibrium"


def _state_roots(linear: Linear) -> np.ndarray:
    r = linear.M.shape[0]
    if r == 0:
        return np.zeros(0, dtype=complex)
    Minv = np.linalg.inv(linear.M)
    A = np.block([[np.zeros((r, r)), np.eye(r)], [-Minv @ linear.S, -Minv @ linear.D]])
    return np.linalg.eigvals(A)


def modes(linear: Linear, names: tuple[str, ...]) -> tuple[Mode, ...]:
    """Modes sorted by natural frequency, shapes normalised to a largest component of 1.

    Symmetric systems: frequencies and shapes from K φ = ω² M φ, damping from the
    state-space roots.  With gyroscopic or circulatory parts the undamped problem
    does not give the frequencies (a rotating frame splits them), so every mode
    comes from the state-space roots.
    """
    r = linear.M.shape[0]
    if r == 0:
        return ()
    if _has_skew_parts(linear):
        return _state_space_modes(linear, names)
    K = (linear.S + linear.S.T) / 2
    lam, vecs = la.eigh(K, linear.M)
    scale = max(1.0, float(np.max(np.abs(lam))))
    roots = _state_roots(linear)
    damped = _damped_pairs(roots)
    out = []
    for i in range(r):
        value = lam[i]
        shape = _normalise(linear.basis @ vecs[:, i])
        kind = "oscillatory"
        omega = float(np.sqrt(value)) if value > 0 else 0.0
        if abs(value) <= RIGID_TOL * scale:
            kind, omega = "rigid-body", 0.0
        elif value < 0:
            kind = "unstable"
        zeta, wd = _match(damped, omega) if kind == "oscillatory" else (float("nan"), 0.0)
        if kind == "oscillatory" and zeta >= 1.0:
            kind = "overdamped"
        out.append(_mode(i + 1, kind, omega, zeta, wd, shape, names))
    return tuple(out)


def _mode(index, kind, omega, zeta, wd, shape, names) -> Mode:
    return Mode(index=index, kind=kind, natural_frequency_hz=omega / (2 * np.pi),
                natural_frequency_rad_s=omega, damping_ratio=float(zeta) + 0.0,
                damped_frequency_hz=wd / (2 * np.pi),
                shape={n: float(v) + 0.0 for n, v in zip(names, shape)})


def _has_skew_parts(linear: Linear) -> bool:
    """True when the velocity or stiffness matrix has a gyroscopic/circulatory (skew) part."""
    def skew(A):
        return float(np.max(np.abs(A - A.T))) / 2 if A.size else 0.0
    scale = max(1e-300, float(np.max(np.abs(linear.S))) + float(np.max(np.abs(linear.D))))
    return max(skew(linear.D), skew(linear.S)) > 1e-12 * scale


def _state_space_modes(linear: Linear, names: tuple[str, ...]) -> tuple[Mode, ...]:
    """Modes from the eigenvalues s of the first-order system: ω_n = |s|, ζ = −Re s/|s|.

    An oscillatory pair (Im s > 0) is one mode, with the real part of its eigenvector
    (largest component rotated to 1) as the shape; the remaining real roots are
    paired in order: both near zero is a rigid-body mode, both negative an
    overdamped one, otherwise the mode is unstable.
    """
    r = linear.M.shape[0]
    Minv = np.linalg.inv(linear.M)
    A = np.block([[np.zeros((r, r)), np.eye(r)], [-Minv @ linear.S, -Minv @ linear.D]])
    roots, vectors = np.linalg.eig(A)
    scale = max(1.0, float(np.max(np.abs(roots))))
    found = []
    is_real = np.abs(roots.imag) <= 1e-9 * np.maximum(1.0, np.abs(roots))
    for s, v, flag in zip(roots, vectors.T, is_real):
        if not flag and s.imag > 0:
            wn = float(abs(s))
            kind = "oscillatory" if s.real <= 1e-9 * wn else "unstable"
            found.append((wn, kind, float(-s.real / wn), float(s.imag), linear.basis @ v[:r]))
    real = sorted(((float(s.real), v) for s, v, flag in zip(roots, vectors.T, is_real) if flag),
                  key=lambda item: item[0])
    for (a, va), (b, _) in zip(real[0::2], real[1::2]):
        shape = linear.basis @ va[:r].real
        if max(abs(a), abs(b)) <= np.sqrt(RIGID_TOL) * scale:
            found.append((0.0, "rigid-body", float("nan"), 0.0, shape))
        elif a < 0 and b < 0:
            wn = float(np.sqrt(a * b))
            found.append((wn, "overdamped", float(-(a + b) / (2 * wn)), 0.0, shape))
        else:
            found.append((float(np.sqrt(abs(a * b))), "unstable", float("nan"), 0.0, shape))
    found.sort(key=lambda item: item[0])
    return tuple(_mode(i + 1, kind, wn, zeta, wd, _normalise(shape).real, names)
                 for i, (wn, kind, zeta, wd, shape) in enumerate(found[:r]))


def _nonzero(roots: np.ndarray) -> np.ndarray:
    """The roots that are not numerically zero (see ZERO_ROOT)."""
    if not roots.size:
        return roots
    return roots[np.abs(roots) > ZERO_ROOT * max(1.0, float(np.max(np.abs(roots))))]


def _damped_pairs(roots: np.ndarray) -> list[tuple[float, float, float]]:
    """(ω_n, ζ, ω_d) of each oscillatory pair and each pair of real (overdamped) roots."""
    roots = _nonzero(roots)
    pairs = []
    osc = sorted((s for s in roots if s.imag > 1e-12 * max(1.0, abs(s))), key=abs)
    for s in osc:
        wn = abs(s)
        pairs.append((wn, -s.real / wn, s.imag))
    real = sorted(s.real for s in roots if abs(s.imag) <= 1e-12 * max(1.0, abs(s)) and s.real < 0)
    for a, b in zip(real[0::2], real[1::2]):
        wn = float(np.sqrt(a * b))
        pairs.append((wn, -(a + b) / (2 * wn), 0.0))
    return pairs


def _match(pairs, omega: float) -> tuple[float, float]:
    """ζ and ω_d of the damped root pair nearest ω (consumed so each pair is used once)."""
    if not pairs:
        return 0.0, omega
    best = min(range(len(pairs)), key=lambda i: abs(pairs[i][0] - omega))
    wn, zeta, wd = pairs.pop(best)
    return float(zeta), float(wd)


def _normalise(v: np.ndarray) -> np.ndarray:
    k = int(np.argmax(np.abs(v)))
    return v / v[k] if v[k] != 0 else v
