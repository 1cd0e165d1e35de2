"""Coulomb friction that sticks (issue 12, item 7), and smoothed friction that cannot overflow.

References beside each check:
- a block sliding with initial speed v0 against friction μ m g decelerates at μ g, so it
  stops at t = v0/(μ g) after x = v0²/(2 μ g) (constant-deceleration kinematics);
- a block at rest pushed by a force a·t breaks away when a t_b = μ m g and then
  m ẍ = a (t − t_b), so x = a (t − t_b)³ / (6 m);
- a spring-mass with Coulomb friction F: each half cycle lasts π sqrt(m/k) and ends
  2F/k nearer the centre, x_{n+1} = −(x_n − 2F/k·sign x_n), and the mass stays where it
  stops once |x| ≤ F/k (J. P. Den Hartog, Mechanical Vibrations, 4th ed., McGraw-Hill
  1956, the chapter on Coulomb damping; from memory).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import sympy as sp

from calcsheaf.mechanics.safe_forms import overflow_safe
from helpers_calc import check, report_of, result

G = 9.80665
M, MU = 2.0, 0.3


def friction_calc(dissipation: str = "0", force: str = "0", k: float = 0.0, x0: float = 0.0,
                  v0: float = 0.0, duration: float = 1.0, extra: str = "") -> str:
    return f"""
    [calc]
    number = "F-1"
    title = "block with dry friction"

    [parameters]
    m = "{M} kg"
    k = "{k} N/m"
    mu = "{MU}"
    g = "{G} m/s^2"
    a = "3 N/s"
    vs = "1 mm/s"

    [coordinates]
    x = {{ unit = "m" }}

    [energy]
    kinetic = "m/2*dot(x)**2"
    potential = "k/2*x**2"
    dissipation = "{dissipation}"

    [generalized_forces]
    x = "{force}"

    [initial]
    x = "{x0} m"
    "dot(x)" = "{v0} m/s"

    [analysis]
    equilibrium = false
    modes = false

    [time_history]
    duration = "{duration} s"
    points = 200

    [[output]]
    name = "F_f"
    expr = "-mu*m*g*sign(dot(x))"
    unit = "N"
    label = "friction force on the block"

    [[result]]
    name = "x_end"
    expr = "final(x)"
    unit = "m"

    [[result]]
    name = "F_end"
    expr = "final(F_f)"
    unit = "N"
    {extra}
    """


@pytest.mark.parametrize("law", [dict(dissipation="mu*m*g*abs(dot(x))"),
                                 dict(force="-mu*m*g*sign(dot(x))")], ids=["R=F|v|", "Q=-F sign(v)"])
def test_sliding_block_stops_at_the_closed_form_time_and_place(tmp_path, law):
    v0 = 1.0
    report = report_of(tmp_path, friction_calc(v0=v0, **law))
    assert report.error is None
    assert report.passed, [c for c in report.checks if not c.passed]
    # Constant deceleration μ g: stops at v0/(μ g), after v0²/(2 μ g).
    assert result(report, "x_end") == pytest.approx(v0 ** 2 / (2 * MU * G), rel=1e-9)
    phases = report.time_history.phases
    assert [p[2] for p in phases] == ["sliding", "stuck"]
    assert phases[0][1] == pytest.approx(v0 / (MU * G), rel=1e-9)
    assert result(report, "F_end") == 0.0              # at rest without load: no friction force
    for c in check(report, "solver"):
        assert "2 stick-slip phase(s), 1 with friction stuck" in c.detail


def test_spring_mass_with_coulomb_friction_sticks_where_the_closed_form_says(tmp_path):
    k, x0 = 100.0, 0.3
    F = MU * M * G
    report = report_of(tmp_path, friction_calc(dissipation="mu*m*g*abs(dot(x))", k=k, x0=x0, duration=3.0))
    assert report.passed, [c for c in report.checks if not c.passed]
    # Half cycles of π sqrt(m/k), each ending 2F/k nearer the centre, until |x| <= F/k.
    x, half_cycles = x0, 0
    while abs(x) > F / k:
        x = -(x - 2 * F / k * math.copysign(1.0, x))
        half_cycles += 1
    assert result(report, "x_end") == pytest.approx(x, rel=1e-8)
    phases = report.time_history.phases
    assert [p[2] for p in phases] == ["sliding"] * half_cycles + ["stuck"]
    assert phases[-1][0] == pytest.approx(half_cycles * math.pi * math.sqrt(M / k), rel=1e-8)
    # Stuck, friction holds the spring: F_f = k x (static balance), below F.
    assert result(report, "F_end") == pytest.approx(k * x, rel=1e-8)
    assert abs(result(report, "F_end")) < F


def test_block_breaks_away_when_the_force_reaches_the_friction_limit(tmp_path):
    a = 3.0
    t_b = MU * M * G / a
    T = t_b + 0.5
    extra = f"""
    [[result]]
    name = "x_late"
    expr = "at(x, {T})"
    unit = "m"
    """
    report = report_of(tmp_path, friction_calc(force="a*t - mu*m*g*sign(dot(x))", duration=T + 0.1,
                                               extra=extra))
    assert report.passed, [c for c in report.checks if not c.passed]
    phases = report.time_history.phases
    assert [p[2] for p in phases] == ["stuck", "sliding"]
    assert phases[0][1] == pytest.approx(t_b, rel=1e-9)
    # m ẍ = a (t − t_b) after break-away.
    assert result(report, "x_late") == pytest.approx(a * (T - t_b) ** 3 / (6 * M), rel=1e-7)


def test_smoothed_friction_far_above_its_smoothing_speed_does_not_overflow(tmp_path):
    """R = F v_s log(cosh(v/v_s)) at v0 = 1000 v_s (cosh overflows past 710)."""
    v0 = 1.0
    report = report_of(tmp_path, friction_calc(dissipation="mu*m*g*vs*log(cosh(dot(x)/vs))", v0=v0))
    assert report.error is None
    assert report.passed, [c for c in report.checks if not c.passed]
    # Above v_s the law is Coulomb's to within F (1 − tanh(v/v_s)); the stop differs by O(v_s).
    assert result(report, "x_end") == pytest.approx(v0 ** 2 / (2 * MU * G), rel=1e-4)


def test_overflow_safe_forms_equal_the_originals():
    """Exact rewrites, checked against sympy's 50-digit evaluation of the original."""
    u = sp.Symbol("u", real=True)
    for expr in (sp.log(sp.cosh(u)), 3 * sp.sinh(u) / sp.cosh(u), u * sp.sinh(2 * u) ** 2 / sp.cosh(2 * u) ** 2):
        safe = overflow_safe(expr)
        assert not safe.has(sp.sinh)
        fn = sp.lambdify([u], safe, modules="math")
        for value in (-3.0, 0.0, 0.7, 25.0):
            assert fn(value) == pytest.approx(float(expr.subs(u, value).evalf(50)), rel=1e-13, abs=1e-15)
        assert np.isfinite(fn(1000.0))
    assert sp.lambdify([u], overflow_safe(sp.log(sp.cosh(u))), modules="math")(1000.0) == pytest.approx(
        1000.0 - math.log(2.0), rel=1e-15)
