"""Energy audit when T or V switches in time (issue 12, item 6).

A step load written in the potential, V = k/2 x² − F0 x step(t − t1), makes ∂L/∂t
hold a Dirac term at t1; the audit must count the jump of L there, pass when the
motion is right and fail when it is wrong.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest
import sympy as sp

from calcsheaf.calcfile.loader import load_calc
from calcsheaf.mechanics import simulate
from calcsheaf.mechanics.codegen import NumericSystem
from calcsheaf.mechanics.energy import audit, switch_times
from calcsheaf.mechanics.lagrange import derive

from helpers_calc import check, report_of, write_calc

M, K, F0, T1, X0 = 2.0, 800.0, 50.0, 0.3, 0.02


def step_calc(potential: str, kinetic: str = "m/2*dot(x)**2", points: int = 400,
              x0: float = X0, duration: float = 1.0) -> str:
    return f"""
    [calc]
    number = "J-1"
    title = "load switched in time"

    [parameters]
    m = "{M} kg"
    k = "{K} N/m"
    F0 = "{F0} N"
    t1 = "{T1} s"
    v_b = "0.5 m/s"
    Omega = "31.4159 rad/s"

    [coordinates]
    x = {{ unit = "m" }}

    [energy]
    kinetic = "{kinetic}"
    potential = "{potential}"

    [initial]
    x = "{x0} m"
    "dot(x)" = "0 m/s"

    [analysis]
    equilibrium = false
    modes = false

    [time_history]
    duration = "{duration} s"
    points = {points}
    """


def closed_form_step(t: float) -> float:
    """x(t) of m ẍ + k x = F0 step(t − t1), x(0) = X0, ẋ(0) = 0.

    Reference: superposition of free vibration and the step response of an
    undamped oscillator (e.g. Rao, Mechanical Vibrations, section on the
    response to a step force; from memory), checked here at t = 1 s.
    """
    w = math.sqrt(K / M)
    if t <= T1:
        return X0 * math.cos(w * t)
    x1, v1 = X0 * math.cos(w * T1), -X0 * w * math.sin(w * T1)
    s = F0 / K
    return s + (x1 - s) * math.cos(w * (t - T1)) + v1 / w * math.sin(w * (t - T1))


def test_step_load_in_V_passes_the_audit_and_matches_the_closed_form(tmp_path):
    report = report_of(tmp_path, step_calc("k/2*x**2 - F0*x*step(t - t1)"))
    energy = check(report, "energy")[0]
    assert energy.passed, energy.detail
    assert report.energy.max_relative_residual < 1e-7
    # The switch at t1 is named in the notes with the work it puts in: −ΔL = −F0 x(t1).
    note = next(n for n in report.energy.notes if "switches in time" in n)
    assert "t = 0.3 s" in note
    expected_work = -F0 * closed_form_step(T1)
    assert f"{expected_work:.6g} J" in note
    x = next(s for s in report.time_history.series if s.name == "x").values
    assert x[-1] == pytest.approx(closed_form_step(1.0), rel=1e-7, abs=1e-9)


def test_step_load_with_a_sample_exactly_at_the_switch(tmp_path):
    # points = 11 puts a sample at t = 0.3 s, where step(0) = 1/2: half the jump counts there.
    report = report_of(tmp_path, step_calc("k/2*x**2 - F0*x*step(t - t1)", points=11))
    assert np.any(np.abs(report.energy.t - T1) < 1e-12)
    assert check(report, "energy")[0].passed, check(report, "energy")[0].detail


def test_square_wave_load_switching_at_t0_and_every_half_period(tmp_path):
    # sign(sin Ωt) switches at t = 0 (where it is 0) and every π/Ω = 0.1000001 s: 10 switches in 1 s.
    report = report_of(tmp_path, step_calc("k/2*x**2 - F0*x*sign(sin(Omega*t))", x0=0.01))
    note = next(n for n in report.energy.notes if "switches in time" in n)
    assert "10 time(s)" in note and "t = 0, 0.1," in note
    assert check(report, "energy")[0].passed, check(report, "energy")[0].detail


def test_switch_times_are_located_to_round_off():
    t = sp.Symbol("t", real=True)
    switches = switch_times(sp.sin(sp.Float(31.4159) * t), 1.0)
    assert len(switches) == 10
    # Brent's method to its default tolerance, xtol = 2e-12 s (scipy.optimize.brentq).
    np.testing.assert_allclose([s.t for s in switches], np.arange(10) * math.pi / 31.4159, rtol=0, atol=2e-12)
    # sin rises through 0 at t = 0 (the side before the record taken as the opposite one),
    # then falls, rises, ...
    assert [(s.before, s.after) for s in switches[:3]] == [(-1, 1), (1, -1), (-1, 1)]
    assert all(s.lo <= s.t <= s.hi and s.hi - s.lo <= 2 / 20_000 for s in switches)


def test_audit_fails_when_the_motion_misses_the_step(tmp_path):
    """The motion of m ẍ + k x = 0 (step force lost) audited against V with the step."""
    spec = load_calc(write_calc(tmp_path, step_calc("k/2*x**2 - F0*x*step(t - t1)")))
    d = derive(spec)
    wrong = replace(d, f=d.f.applyfunc(lambda e: e.replace(sp.Heaviside, lambda *a: sp.S.Zero)))
    params = spec.parameter_values
    first, _, _ = simulate.integrate(NumericSystem(wrong, params), spec.time_history,
                                  np.array([X0, 0.0]), simulate.power_functions(d, params))
    t, Y = first.t, first.y
    Q, QD = Y[:1], Y[1:2]
    QDD = np.array([[-K / M * x for x in Q[0]]])
    result = audit(d, params, t, Q, QD, QDD, np.zeros((0, len(t))), Y[2], Y[3],
                   spec.analysis.energy_tolerance, state=first.dense)
    assert not result.passed
    assert result.max_relative_residual > 0.1


def test_kinetic_energy_switching_in_time_fails_with_the_reason(tmp_path):
    # A base velocity that jumps at t1: p = m(ẋ + v_b) must stay continuous (an impulse),
    # which equations taken almost everywhere cannot give.
    report = report_of(tmp_path, step_calc("k/2*x**2", kinetic="m/2*(dot(x) + v_b*step(t - t1))**2"))
    energy = check(report, "energy")[0]
    assert not energy.passed
    assert any("momentum" in n and "impulse" in n for n in report.energy.notes)


def test_continuous_moving_switch_is_not_counted(tmp_path):
    # A step load ramped in: V continuous in t, no switch of L in time.
    report = report_of(tmp_path, step_calc("k/2*x**2 - F0*x*min(t/t1, 1)"))
    assert not any("switches in time" in n for n in report.energy.notes)
    assert check(report, "energy")[0].passed, check(report, "energy")[0].detail


def test_a_constraint_that_moves_in_time_is_named_in_the_audit_notes(tmp_path):
    """A support driven through a constraint y_b = Y sin(W t) feeds work λ·G q̇ into the
    system: the audit passes on h with that work counted, and its notes say so rather
    than claiming h = T + V is conserved (work-energy balance, any dynamics text)."""
    report = report_of(tmp_path, """
        [calc]
        number = "E-9"
        title = "spring-mass on a support moved by a constraint"
        [parameters]
        m = "2 kg"
        m_b = "1 kg"
        k = "800 N/m"
        Y = "5 mm"
        W = "12 rad/s"
        [coordinates]
        x = "m"
        y_b = "m"
        [energy]
        kinetic = "m/2*dot(x)**2 + m_b/2*dot(y_b)**2"
        potential = "k/2*(x - y_b)**2"
        [[constraint]]
        name = "F_drive"
        equation = "y_b - Y*sin(W*t)"
        [initial]
        x = "0 m"
        y_b = "0 m"
        "dot(x)" = "0 m/s"
        "dot(y_b)" = "0.06 m/s"
        [analysis]
        equilibrium = false
        [time_history]
        duration = "1 s"
        points = 200
        """)
    assert report.error is None, report.error
    assert report.energy.passed, report.energy
    assert any("A constraint depends on t" in n and "not conserved" in n for n in report.energy.notes)
