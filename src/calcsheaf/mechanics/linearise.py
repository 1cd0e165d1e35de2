"""Linearisation about the equilibrium and modal analysis.

M q̈ + (C + G) q̇ + (K + N) q = 0 about the equilibrium state (q*, q̇*, t0), with
C, K symmetric and G, N skew (gyroscopic, circulatory).  q̇* is zero except
for the velocities a steady motion's driven constraints prescribe.
Constraints are removed by a null-space basis of their Jacobian.

Every mode comes from one root λ of the damped linear system and its
conjugate: ω_n = |λ|, ζ = −Re λ/|λ|, ω_d = |Im λ|, so the three columns of a
mode always describe the same root.

* Classical damping (no skew parts and K M⁻¹C = C M⁻¹K, which includes C = 0):
  the undamped shapes φ of K φ = ω² M φ also uncouple the damping, and each
  mode's two roots are those of s² + 2ζω s + ω² = 0 with 2ζω = φᵀCφ/φᵀMφ.
  The shapes are real.
* Otherwise: the eigenvalues and eigenvectors of the first-order (state-space)
  matrix; shapes are complex in general and kept as magnitude and phase.

A pair of real roots a, b < 0 is one overdamped mode with ω_n = √(ab) and
ζ = −(a + b)/(2√(ab)) (the roots of s² + 2ζω_n s + ω_n² = 0).  A root with a
positive real part σ makes the mode unstable: its growth rate σ [1/s] and
doubling time ln 2/σ [s] are reported; a real growing root has no natural
frequency (NaN), an oscillating one keeps ω_n = |λ| and a negative ζ.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np
import scipy.linalg as la
import sympy as sp

from ..calcfile.expressions import TIME
from ..errors import AnalysisError
from ..model import Linearisation, Mode
from .codegen import numeric
from .lagrange import Derivation, jacobian_ae

RIGID_TOL = 1e-9
ZERO_ROOT = 1e-6           # |s| below this times the largest |s| is a zero (rigid-body) root when
                           # the stiffness is singular: a double zero root splits to about
                           # sqrt(machine eps) in floating point
REAL_ROOT = 1e-9           # |Im s| below this times max(1, |s|): a real root
GROWING = 1e-9             # Re s above this times max(1, |s|): a growing root
REAL_SHAPE = 1e-6          # largest imaginary part of a normalised shape that is still real
CLASSICAL = 1e-9           # relative commutator ‖K M⁻¹C − C M⁻¹K‖ of classical damping
LN2 = float(np.log(2.0))


@dataclass(frozen=True)
class Linear:
    """Reduced linear model plus the basis that maps it back to all coordinates."""
    full: Linearisation
    basis: np.ndarray          # n × r
    M: np.ndarray
    D: np.ndarray              # full velocity matrix C + G (reduced)
    S: np.ndarray              # full stiffness matrix K + N (reduced)


@dataclass(frozen=True)
class Stability:
    stable: bool
    verdict: str
    growth_rate: float         # 1/s, largest Re λ of a growing root; NaN when none grows

    @property
    def doubling_time(self) -> float:
        """s, ln 2 / growth rate; NaN when nothing grows."""
        return LN2 / self.growth_rate if self.growth_rate > 0 else float("nan")


def linearise(derivation: Derivation, params: dict[str, float], q_eq: np.ndarray,
              lambdas: np.ndarray, qd_eq: np.ndarray | None = None, t: float = 0.0) -> Linear:
    """Jacobians of M q̈ = f + Gᵀλ at (q_eq, qd_eq, t) with λ held at `lambdas` (SI)."""
    d = derivation
    n, m = len(d.q), len(d.lambdas)
    qd_eq = np.zeros(n) if qd_eq is None else np.asarray(qd_eq, dtype=float)
    forcing = d.f + (d.G.T * sp.Matrix(d.lambdas) if d.lambdas else sp.zeros(len(d.q), 1))
    jac_q = jacobian_ae(forcing, d.q)
    jac_qd = jacobian_ae(forcing, d.qd)
    args = [TIME, *d.q, *d.qd, *d.lambdas]
    fn = sp.lambdify(args, [numeric(e, params) for e in (*d.M, *jac_q, *jac_qd, *d.G)],
                     modules="math", cse=True)
    try:
        flat = np.array(fn(float(t), *q_eq, *qd_eq, *lambdas), dtype=float)
    except (ValueError, ArithmeticError) as exc:
        raise _not_linearisable(f"evaluating the derivatives raised {type(exc).__name__}: {exc}") from None
    if not np.all(np.isfinite(flat)):
        raise _not_linearisable("a derivative of the equations is not finite there")
    M = flat[:n * n].reshape(n, n)
    S = -flat[n * n:2 * n * n].reshape(n, n)
    D = -flat[2 * n * n:3 * n * n].reshape(n, n)
    Gc = flat[3 * n * n:].reshape(m, n)
    basis = la.null_space(Gc) if m else np.eye(n)
    full = Linearisation(coordinates=tuple(str(s) for s in d.q), M=M, C=_sym(D), G=_skew(D),
                         K=_sym(S), N=_skew(S), velocities=tuple(float(v) for v in qd_eq),
                         time=float(t))
    B = basis
    return Linear(full=full, basis=B, M=B.T @ M @ B, D=B.T @ D @ B, S=B.T @ S @ B)


def _sym(A):
    return (A + A.T) / 2


def _skew(A):
    return (A - A.T) / 2


def _not_linearisable(why: str) -> AnalysisError:
    return AnalysisError(f"the equations cannot be linearised at the equilibrium: {why} "
                         "(e.g. a non-smooth or infinitely stiff term)", key="analysis.modes",
                         fix="set [analysis] modes = false, or smooth the offending term")


def state_matrix(linear: Linear) -> np.ndarray:
    """A of ẏ = A y, y = [q, q̇] (reduced): [[0, I], [−M⁻¹(K + N), −M⁻¹(C + G)]]."""
    r = linear.M.shape[0]
    Minv = np.linalg.inv(linear.M)
    return np.block([[np.zeros((r, r)), np.eye(r)], [-Minv @ linear.S, -Minv @ linear.D]])


def roots(linear: Linear) -> np.ndarray:
    """Eigenvalues of the state matrix (1/s); numerically zero ones set to exactly 0."""
    if linear.M.shape[0] == 0:
        return np.zeros(0, dtype=complex)
    return _clean(np.linalg.eigvals(state_matrix(linear)), linear)


def _clean(s: np.ndarray, linear: Linear) -> np.ndarray:
    """Set to 0 the at most 2k smallest roots below ZERO_ROOT × max|s|, where k is the number
    of zero singular values of the stiffness (only a singular stiffness has zero roots)."""
    s = np.array(s, dtype=complex)
    sv = np.linalg.svd(linear.S, compute_uv=False) if linear.S.size else np.zeros(0)
    k = int(np.sum(sv <= RIGID_TOL * max(1.0, float(np.max(sv)) if sv.size else 1.0)))
    if s.size and k:
        small = [i for i in np.argsort(np.abs(s))[:2 * k]
                 if abs(s[i]) <= ZERO_ROOT * max(1.0, float(np.max(np.abs(s))))]
        s[small] = 0.0
    return s


def _growing(s: complex) -> bool:
    return s.real > GROWING * max(1.0, abs(s))


def stability(linear: Linear) -> Stability:
    """Stable when no root of the linearised system grows; for symmetric systems this needs a
    positive (semi-)definite stiffness, with gyroscopic coupling it may hold without one."""
    K = _sym(linear.S)
    eig = np.linalg.eigvalsh(K) if K.size else np.zeros(0)
    scale = max(1.0, float(np.max(np.abs(eig)))) if eig.size else 1.0
    growing = [s for s in roots(linear) if _growing(s)]
    rate = max((s.real for s in growing), default=float("nan"))
    negative = bool(eig.size and eig.min() < -RIGID_TOL * scale)
    if growing:
        why = ("the stiffness at the equilibrium has a negative eigenvalue"
               if negative and not _has_skew_parts(linear)
               else "a root of the linearised system has a positive real part")
        return Stability(False, f"unstable: {why}; growth rate {rate:.4g} 1/s, "
                                f"doubling time {LN2 / rate:.4g} s", float(rate))
    if negative:
        return Stability(True, "stable by gyroscopic coupling: no root of the linearised system grows "
                               "although the stiffness has a negative eigenvalue (damping may "
                               "destabilise it)", rate)
    if eig.size and eig.min() <= RIGID_TOL * scale:
        return Stability(True, "neutrally stable: zero stiffness in at least one direction "
                               "(rigid-body mode)", rate)
    return Stability(True, "stable: stiffness positive definite at the equilibrium", rate)


# ---- modes ---------------------------------------------------------------------------
@dataclass(frozen=True)
class _Root:
    """One mode before numbering: its roots (1/s) and its shape over all coordinates."""
    roots: tuple[complex, ...]
    shape: np.ndarray


def modes(linear: Linear, names: tuple[str, ...]) -> tuple[Mode, ...]:
    """Modes sorted by natural frequency (growing real modes last, by growth rate)."""
    if linear.M.shape[0] == 0:
        return ()
    found = _classical_modes(linear) if _is_classical(linear) else _state_space_modes(linear)
    built = [_mode(item, names) for item in found]
    built.sort(key=lambda md: (np.isnan(md.natural_frequency_rad_s),
                               md.natural_frequency_rad_s if not np.isnan(md.natural_frequency_rad_s)
                               else md.growth_rate_per_s))
    return tuple(_numbered(md, i + 1) for i, md in enumerate(built))


def _is_classical(linear: Linear) -> bool:
    """No skew parts and K M⁻¹C = C M⁻¹K (Caughey and O'Kelly's condition for real modes)."""
    if _has_skew_parts(linear):
        return False
    K, C, Minv = _sym(linear.S), _sym(linear.D), np.linalg.inv(linear.M)
    size = np.linalg.norm(K) * np.linalg.norm(C) * np.linalg.norm(Minv)
    if size == 0.0:
        return True
    return float(np.linalg.norm(K @ Minv @ C - C @ Minv @ K)) <= CLASSICAL * size


def _classical_modes(linear: Linear) -> list[_Root]:
    """Real shapes from K φ = ω² M φ; each mode's roots from s² + (φᵀCφ/φᵀMφ) s + ω² = 0."""
    K, C = _sym(linear.S), _sym(linear.D)
    lam, vecs = la.eigh(K, linear.M)
    scale = max(1.0, float(np.max(np.abs(lam))))
    out = []
    for i in range(len(lam)):
        phi = vecs[:, i]
        w2 = 0.0 if abs(lam[i]) <= RIGID_TOL * scale else float(lam[i])
        b = float(phi @ C @ phi) / float(phi @ linear.M @ phi)        # 2 ζ ω, 1/s
        disc = complex(b * b - 4 * w2)
        pair = ((-b + np.sqrt(disc)) / 2, (-b - np.sqrt(disc)) / 2)
        out.append(_Root(tuple(complex(x) for x in pair), linear.basis @ phi))
    return out


def _state_space_modes(linear: Linear) -> list[_Root]:
    """Complex pairs and paired real roots of the state matrix, with their eigenvectors."""
    r = linear.M.shape[0]
    values, vectors = np.linalg.eig(state_matrix(linear))
    values = _clean(values, linear)
    shapes = [linear.basis @ v[:r] for v in vectors.T]
    real = [i for i, s in enumerate(values) if abs(s.imag) <= REAL_ROOT * max(1.0, abs(s))]
    out = [_Root((complex(s), complex(np.conj(s))), shapes[i])
           for i, s in enumerate(values) if i not in real and s.imag > 0]
    for i, j in _pairs_by_shape(real, shapes):
        a, b = sorted((values[i].real, values[j].real), reverse=True)
        keep = i if values[i].real >= values[j].real else j           # the slower (or growing) root
        out.append(_Root((complex(a), complex(b)), shapes[keep]))
    return out[:r]


def _pairs_by_shape(indices: list[int], shapes: list[np.ndarray]) -> list[tuple[int, int]]:
    """Pair real roots whose eigenvectors are most nearly parallel (greedy); ties keep order."""
    left = list(indices)
    pairs = []
    while len(left) >= 2:
        best = None
        for a in range(len(left)):
            for b in range(a + 1, len(left)):
                u, v = shapes[left[a]], shapes[left[b]]
                norm = float(np.linalg.norm(u) * np.linalg.norm(v))
                cos = abs(complex(np.vdot(u, v))) / norm if norm else 0.0
                if best is None or cos > best[0] + 1e-12:
                    best = (cos, a, b)
        _, a, b = best
        pairs.append((left[a], left[b]))
        left = [k for n, k in enumerate(left) if n not in (a, b)]
    return pairs


def _mode(item: _Root, names: tuple[str, ...]) -> Mode:
    """The numbers of one mode, all from its roots (see the module docstring)."""
    first, second = item.roots
    growth = max(first.real, second.real)
    growth = float(growth) if _growing(first) or _growing(second) else float("nan")
    if abs(first.imag) > 0:                                           # oscillating pair
        wn = float(abs(first))
        zeta, wd = float(-first.real / wn), float(abs(first.imag))
        kind = "unstable" if not np.isnan(growth) else "oscillatory"
    elif not np.isnan(growth):                                        # a real growing root
        wn, zeta, wd, kind = float("nan"), float("nan"), 0.0, "unstable"
    elif first == 0:                                                  # a zero root: drifts freely
        wn, zeta, wd, kind = 0.0, float("nan"), 0.0, "rigid-body"
    else:                                                             # two real decaying roots
        wn = float(np.sqrt(first.real * second.real))
        zeta, wd, kind = float(-(first.real + second.real) / (2 * wn)), 0.0, "overdamped"
    magnitude, phase, shape = _shape(item.shape)
    return Mode(index=0, kind=kind, natural_frequency_hz=wn / (2 * np.pi),
                natural_frequency_rad_s=wn, damping_ratio=zeta + 0.0, damped_frequency_hz=wd / (2 * np.pi),
                shape={n: float(v) + 0.0 for n, v in zip(names, shape)},
                roots=tuple((float(s.real) + 0.0, float(s.imag) + 0.0) for s in item.roots),
                growth_rate_per_s=growth,
                doubling_time_s=LN2 / growth if not np.isnan(growth) else float("nan"),
                shape_magnitude=None if magnitude is None else dict(zip(names, magnitude)),
                shape_phase_deg=None if phase is None else dict(zip(names, phase)))


def _shape(vector: np.ndarray):
    """(magnitudes, phases in degrees, real shape) of a shape normalised to a largest component
    of 1; magnitudes and phases are None when the shape is real (every phase 0 or 180°)."""
    v = np.asarray(vector, dtype=complex)
    k = int(np.argmax(np.abs(v)))
    if v[k] != 0:
        v = v / v[k]
    if float(np.max(np.abs(v.imag))) <= REAL_SHAPE:
        return None, None, v.real
    magnitude = [float(x) + 0.0 for x in np.abs(v)]
    phase = [float(np.degrees(np.angle(x))) + 0.0 if abs(x) > REAL_SHAPE else 0.0 for x in v]
    return magnitude, phase, v.real


def _numbered(mode: Mode, index: int) -> Mode:
    return replace(mode, index=index)


def _has_skew_parts(linear: Linear) -> bool:
    """True when the velocity or stiffness matrix has a gyroscopic/circulatory (skew) part."""
    def skew(A):
        return float(np.max(np.abs(A - A.T))) / 2 if A.size else 0.0
    scale = max(1e-300, float(np.max(np.abs(linear.S))) + float(np.max(np.abs(linear.D))))
    return max(skew(linear.D), skew(linear.S)) > 1e-12 * scale
