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


def peak(amplitude_at, freqs: np.ndarray, values: np.ndarray) -> tuple[float, float]:
    """(largest amplitude, its frequency) over the range, refined between grid points."""
    i = int(np.argmax(values))
    lo, hi = freqs[max(i - 1, 0)], freqs[min(i + 1, len(freqs) - 1)]
    best = (float(values[i]), float(freqs[i]))
    if hi > lo:
        sol = optimize.minimize_scalar(lambda f: -amplitude_at(f), bounds=(lo, hi),
                                       method="bounded", options={"xatol": 1e-10 * hi})
        if -sol.fun > best[0]:
            best = (float(-sol.fun), float(sol.x))
    return best
