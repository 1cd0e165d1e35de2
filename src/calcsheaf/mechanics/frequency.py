"""Steady harmonic response of the linearised system.

For a generalized-force amplitude vector F at circular frequency ω the complex
amplitude is X = B (S − ω² M + iω D)⁻¹ Bᵀ F (reduced coordinates, basis B).
Amplitudes are |X| about the equilibrium; phases are of X relative to the force
(degrees, negative = lagging).  Outputs are linearised about the equilibrium.
"""

from __future__ import annotations

import numpy as np
from scipy import optimize

from .linearise import Linear


def response(linear: Linear, force: np.ndarray, f_hz: float) -> np.ndarray:
    """Complex amplitude of every coordinate at `f_hz`."""
    w = 2 * np.pi * f_hz
    B = linear.basis
    A = linear.S - w * w * linear.M + 1j * w * linear.D
    return B @ np.linalg.solve(A, B.T @ force)


def grid(start_hz: float, stop_hz: float, points: int, spacing: str) -> np.ndarray:
    if spacing == "log":
        return np.geomspace(start_hz, stop_hz, points)
    return np.linspace(start_hz, stop_hz, points)


def sweep(linear: Linear, force: np.ndarray, freqs: np.ndarray) -> np.ndarray:
    """(n, N) complex amplitudes over the frequency grid."""
    return np.stack([response(linear, force, f) for f in freqs], axis=1)


def resonances(linear: Linear) -> tuple[tuple[float, float], ...]:
    """(f_n in Hz, ζ) of every oscillating root of the linearised system (Im λ > 0)."""
    r = linear.M.shape[0]
    if r == 0:
        return ()
    Minv = np.linalg.inv(linear.M)
    A = np.block([[np.zeros((r, r)), np.eye(r)], [-Minv @ linear.S, -Minv @ linear.D]])
    roots = np.linalg.eigvals(A)
    return tuple((float(abs(lam)) / (2 * np.pi), float(-lam.real / abs(lam)))
                 for lam in roots if lam.imag > 0 and abs(lam) > 0)


def peak(amplitude_at, freqs: np.ndarray, values: np.ndarray,
         modes: tuple[tuple[float, float], ...] = ()) -> tuple[float, float]:
    """(largest amplitude, its frequency) over the range, refined between grid points.

    Refined around every local maximum of the grid values and around every resonance
    in `modes` ((f_n Hz, ζ), see `resonances`) inside the range: a lightly damped peak
    narrower than the grid spacing is found even when no grid point falls on it.
    """
    best = (float(values[int(np.argmax(values))]), float(freqs[int(np.argmax(values))]))
    for lo, hi in _brackets(freqs, values, modes):
        sol = optimize.minimize_scalar(lambda f: -amplitude_at(f), bounds=(lo, hi),
                                       method="bounded", options={"xatol": 1e-10 * hi})
        if -sol.fun > best[0]:
            best = (float(-sol.fun), float(sol.x))
    return best


def _brackets(freqs: np.ndarray, values: np.ndarray, modes) -> list[tuple[float, float]]:
    """Search intervals: the grid neighbours of each local maximum, and f_n (1 ± 4ζ)
    (at least ± 1e-6 f_n) around each resonance, clipped to the range."""
    last = len(freqs) - 1
    out = []
    for i in range(len(freqs)):
        left = values[i - 1] if i > 0 else -np.inf
        right = values[i + 1] if i < last else -np.inf
        if values[i] >= left and values[i] >= right:
            out.append((freqs[max(i - 1, 0)], freqs[min(i + 1, last)]))
    for f_n, zeta in modes:
        half = f_n * max(4 * abs(zeta), 1e-6)
        lo, hi = max(f_n - half, freqs[0]), min(f_n + half, freqs[-1])
        if lo < hi:
            out.append((lo, hi))
    return [(float(lo), float(hi)) for lo, hi in out if hi > lo]
