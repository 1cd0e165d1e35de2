"""Largest and smallest values of a quantity along the dense solution, not only at the samples.

A quantity e(t) is known at the times of a fine grid (the samples, every step
of the integrator and points inside each step) and, through the integrator's
dense output, at any time.  Candidates for its maximum are

- every grid value;
- each local maximum of the grid values, refined between its neighbours with
  bounded Brent minimisation (scipy.optimize.minimize_scalar) when the refined
  value could exceed the best grid value: for a smooth peak between grid
  points the excess over the highest grid point is at most the larger
  difference to its neighbours (a parabola through three points);
- both one-sided values at every switching time, where the argument of a
  step, sign, abs, min or max in the quantity or in the equations of motion
  changes sign (located with brentq), because a jump or a kink can carry the
  extreme.

The minimum is the maximum of −e.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np
from scipy import optimize

ONE_SIDED = 1e-9                  # one-sided values at t_s ± ONE_SIDED·(record length)
MAX_REFINED = 200                 # local maxima refined at most, highest bound first


@dataclass(frozen=True)
class Extremes:
    """Max and min of a quantity with the times they occur (SI, s)."""
    max: float
    t_max: float
    min: float
    t_min: float

    @property
    def peak(self) -> float:
        return max(abs(self.max), abs(self.min))

    @property
    def t_peak(self) -> float:
        return self.t_max if abs(self.max) >= abs(self.min) else self.t_min


def switching_times(t: np.ndarray, arguments: list[np.ndarray], at: Callable[[int, float], float]) -> list[float]:
    """Times where a switching argument changes sign between grid points, refined with brentq.

    `arguments` holds each argument's values on `t`; `at(j, time)` evaluates
    argument j at any time from the dense solution.
    """
    out = []
    for j, values in enumerate(arguments):
        signs = np.sign(values)
        for k in np.nonzero(signs[:-1] * signs[1:] < 0)[0]:
            a, b = float(t[k]), float(t[k + 1])
            fa, fb = at(j, a), at(j, b)
            if fa * fb < 0:
                out.append(float(optimize.brentq(lambda s: at(j, s), a, b, xtol=1e-15, rtol=1e-14)))
            else:
                out.append(a if abs(fa) <= abs(fb) else b)
        out.extend(float(t[k]) for k in np.nonzero(values == 0.0)[0])
    return sorted(set(out))


def extremes(t: np.ndarray, values: np.ndarray, value_at: Callable[[float], float],
             switches: list[float] = ()) -> Extremes:
    """Max and min of a quantity given on grid `t`, refined between grid points and at switches."""
    span = float(t[-1] - t[0]) or 1.0
    side = ONE_SIDED * span
    extra_t, extra_v = [], []
    for ts in switches:
        for s in (ts - side, ts + side):
            if t[0] <= s <= t[-1]:
                extra_t.append(s)
                extra_v.append(value_at(s))
    all_t = np.concatenate([t, extra_t])
    all_v = np.concatenate([values, extra_v])
    t_max, v_max = _refined_max(t, values, value_at, all_t, all_v)
    t_min, v_min = _refined_max(t, -values, lambda s: -value_at(s), all_t, -all_v)
    return Extremes(max=v_max, t_max=t_max, min=-v_min, t_min=t_min)


def _refined_max(t, v, value_at, all_t, all_v) -> tuple[float, float]:
    """(time, value) of the largest value: the best candidate, then refined local maxima that could beat it."""
    best = int(np.argmax(all_v))
    best_t, best_v = float(all_t[best]), float(all_v[best])
    if len(v) < 2:
        return best_t, best_v
    left = np.concatenate([[-np.inf], v[:-1]])
    right = np.concatenate([v[1:], [-np.inf]])
    local = np.nonzero((v >= left) & (v >= right))[0]
    # A smooth peak between grid points exceeds the highest of them by at most the larger rise.
    rise = np.maximum(np.where(np.isfinite(left[local]), v[local] - left[local], 0.0),
                      np.where(np.isfinite(right[local]), v[local] - right[local], 0.0))
    last = len(v) - 1
    bound = v[local] + rise
    tol = 1e-12 * max(float(np.max(np.abs(v))), 1e-300)
    for i in np.argsort(-bound, kind="stable")[:MAX_REFINED]:
        if bound[i] <= best_v + tol:
            break                             # no remaining peak can beat the best value
        k = local[i]
        a, b = float(t[max(k - 1, 0)]), float(t[min(k + 1, last)])
        res = optimize.minimize_scalar(lambda s: -value_at(s), bounds=(a, b), method="bounded",
                                       options={"xatol": 1e-13 * max(1.0, abs(b))})
        value = -float(res.fun)
        if value > best_v:
            best_t, best_v = float(res.x), value
    return best_t, best_v
