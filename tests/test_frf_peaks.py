"""Peaks of the frequency response between grid points.

A lightly damped resonance narrower than the grid spacing must still be found: the
peak is searched around every local maximum of the grid and around every root of the
linearised system.  Reference: the steady response X(ω) = (K − ω²M + iωC)⁻¹F solved
directly with numpy on a fine grid and refined with scipy's bounded minimiser (the
standard complex-amplitude solution of forced linear vibration).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.optimize import minimize_scalar

from helpers_calc import report_of

M = np.diag([2.0, 1.0, 3.0])
K = np.array([[6500.0, -2500.0, 0.0], [-2500.0, 4000.0, -1500.0], [0.0, -1500.0, 4500.0]])
C = np.array([[3.0, 0.0, 0.0], [0.0, 1.0, -1.0], [0.0, -1.0, 1.0]])
F = np.array([0.0, 10.0, 0.0])
K3 = 1500.0

CHAIN = """
[calc]
number = "B-05"
title = "three-mass chain, light damping, coarse frequency grid"
[parameters]
m1 = "2 kg"
m2 = "1 kg"
m3 = "3 kg"
k1 = "4000 N/m"
k2 = "2500 N/m"
k3 = "1500 N/m"
k4 = "3000 N/m"
c1 = "3 N*s/m"
c3 = "1 N*s/m"
F0 = "10 N"
F_cap = "90 N"
[coordinates]
x1 = "mm"
x2 = "mm"
x3 = "mm"
[energy]
kinetic = "m1/2*dot(x1)**2 + m2/2*dot(x2)**2 + m3/2*dot(x3)**2"
potential = "k1/2*x1**2 + k2/2*(x2-x1)**2 + k3/2*(x3-x2)**2 + k4/2*x3**2"
dissipation = "c1/2*dot(x1)**2 + c3/2*(dot(x3)-dot(x2))**2"
[initial]
x1 = "0 mm"
x2 = "0 mm"
x3 = "0 mm"
"dot(x1)" = "0 m/s"
"dot(x2)" = "0 m/s"
"dot(x3)" = "0 m/s"
[frequency_response]
force = { x2 = "F0" }
from = "1 Hz"
to = "20 Hz"
points = 60
[[output]]
name = "F_k3"
expr = "k3*(x3 - x2)"
unit = "N"
[[result]]
name = "Fk3peak"
expr = "frf_peak(F_k3)"
unit = "N"
[[criterion]]
name = "spring k3 force under the harmonic load"
demand = "frf_peak(F_k3)"
capacity = "F_cap"
"""


def spring_force(f_hz: float) -> float:
    w = 2 * np.pi * f_hz
    X = np.linalg.solve(K - w * w * M + 1j * w * C, F)
    return float(abs(K3 * (X[2] - X[1])))


def reference_peak() -> float:
    fine = np.linspace(1.0, 20.0, 100001)
    values = np.array([spring_force(f) for f in fine])
    i = int(values.argmax())
    sol = minimize_scalar(lambda f: -spring_force(f), bounds=(fine[i - 2], fine[i + 2]),
                          method="bounded", options={"xatol": 1e-11})
    return -sol.fun


def test_a_resonance_between_coarse_grid_points_is_found_and_fails_the_criterion(tmp_path):
    report = report_of(tmp_path, CHAIN)
    assert report.error is None, report.error
    expected = reference_peak()          # 105.26 N near 11.85 Hz; the grid's best is near 7.4 Hz
    (value,) = [r.value for r in report.results if r.name == "Fk3peak"]
    assert value == pytest.approx(expected, rel=1e-6)
    (criterion,) = report.criteria
    assert criterion.ratio == pytest.approx(expected / 90.0, rel=1e-6) and not criterion.passed
    assert report.frequency_response.peaks["F_k3"].amplitude == pytest.approx(expected, rel=1e-6)
