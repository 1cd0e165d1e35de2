"""Switches the integrators must not step over (mechanics.switches).

D1: a trolley coasting into a 2 mm stiff end stop.  While it coasts the
right-hand side is zero, so an unguarded integrator takes steps far longer
than the stop and never sees it.  Reference, the closed form of free flight
and an elastic contact with a linear spring (the linear oscillator of any
dynamics text): the trolley meets the stop's face x = xb − w at t_c = (xb − w)/v,
stays in contact for half a period π√(m/k), compresses it by at most
δ = v√(m/k) (½ m v² = ½ k δ²) with the force k δ = v√(k m), and leaves at −v.

D2: a spring–mass at rest hit by a rectangular force pulse F0 of length τ.
Reference, the closed form of the rectangular pulse response (Duhamel's
integral of the undamped oscillator): after the pulse
x(t) = F0/k [cos ω(t − t2) − cos ω(t − t1)], amplitude 2 F0/k |sin(ωτ/2)|,
which for ωτ < π exceeds the largest value during the pulse,
F0/k (1 − cos ωτ).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import sympy as sp

from calcsheaf.calcfile.expressions import TIME
from calcsheaf.mechanics import simulate, switches
from helpers_calc import check, derivation_of, report_of, result


def stop_calc(points: int = 10, second: str = "LSODA", width_mm: float = 1.0) -> str:
    return f"""
    [calc]
    number = "S-1"
    title = "trolley coasting into a short stiff end stop"

    [parameters]
    m = "1 kg"
    k = "10 MN/m"
    w = "{width_mm} mm"
    xb = "0.5 m"
    F_cap = "5 kN"
    x_zone = "0.5 m"

    [coordinates]
    x = "m"

    [energy]
    kinetic = "m/2*dot(x)**2"
    potential = "k/2*(w - abs(x - xb))**2*step(w - abs(x - xb))"

    [initial]
    x = "0 m"
    "dot(x)" = "1 m/s"

    [analysis]
    equilibrium = false

    [time_history]
    duration = "2 s"
    points = {points}
    second_method = "{second}"

    [[output]]
    name = "F_stop"
    expr = "k*(w - abs(x - xb))*step(w - abs(x - xb))"
    unit = "N"

    [[result]]
    name = "x_end"
    expr = "final(x)"
    unit = "m"

    [[result]]
    name = "F_peak"
    expr = "peak(F_stop)"
    unit = "N"

    [[criterion]]
    name = "rebound stays clear of the zone"
    demand = "-min(x)"
    capacity = "x_zone"
    """


def stop_closed_form(m=1.0, k=1e7, w=1e-3, xb=0.5, v=1.0, duration=2.0):
    """(final x, peak stop force): free flight, a half-sine contact of π√(m/k), free flight back."""
    t_contact = (xb - w) / v
    t_leave = t_contact + math.pi * math.sqrt(m / k)
    return (xb - w) - v * (duration - t_leave), v * math.sqrt(k * m)


@pytest.mark.parametrize("second", ["LSODA", "Radau", "BDF"])
def test_short_stop_reflects_the_trolley(tmp_path, second):
    report = report_of(tmp_path, stop_calc(second=second))
    x_end, force = stop_closed_form()
    assert result(report, "x_end") == pytest.approx(x_end, rel=1e-6)       # −1.0010065 m
    assert result(report, "F_peak") == pytest.approx(force, rel=1e-5)      # 3162.28 N
    row = report.criteria[0]
    assert not row.passed and row.ratio == pytest.approx(-x_end / 0.5, rel=1e-6)
    assert not report.passed
    assert all(c.passed for c in check(report, "integrators")), check(report, "integrators")
    assert all(c.passed for c in check(report, "energy"))
    assert "state switch" in check(report, "solver")[1].detail


def test_thinner_stop_still_found(tmp_path):
    """A 0.2 mm ridge (0.4 ms wide in time at 1 m/s) stores at most k w²/2 = 0.2 J < ½ m v² = 0.5 J: the
    trolley climbs over it and leaves at v again (energy conservation), delayed.  Each half of the
    crossing is an arc of the linear oscillator δ = (v/ω) sin ωt, ω = √(k/m), up to δ = w: it takes
    asin(w ω / v)/ω; the peak force is k w at the crest."""
    report = report_of(tmp_path, stop_calc(width_mm=0.2))
    m, k, w, v, xb, T = 1.0, 1e7, 2e-4, 1.0, 0.5, 2.0
    omega = math.sqrt(k / m)
    t_out = (xb - w) / v + 2 * math.asin(w * omega / v) / omega
    x_end = xb + w + v * (T - t_out)                     # 1.999967 m: 33 µs later than free flight
    assert result(report, "x_end") == pytest.approx(x_end, rel=1e-9)
    assert result(report, "F_peak") == pytest.approx(k * w, rel=1e-6)


def pulse_calc(where: str) -> str:
    potential = ("k/2*x**2 - F0*x*(step(t - t1) - step(t - t2))" if where == "V" else "k/2*x**2")
    forces = ('[generalized_forces]\nx = "F0*(step(t - t1) - step(t - t2))"' if where == "Q" else "")
    return f"""
    [calc]
    number = "S-2"
    title = "spring-mass hit by a 1 ms rectangular force pulse"

    [parameters]
    m = "10 kg"
    k = "1000 N/m"
    F0 = "1000 N"
    t1 = "0.5 s"
    t2 = "0.501 s"
    x_cap = "5 mm"

    [coordinates]
    x = "mm"

    [energy]
    kinetic = "m/2*dot(x)**2"
    potential = "{potential}"

    {forces}

    [initial]
    x = "0 mm"
    "dot(x)" = "0 m/s"

    [time_history]
    duration = "2 s"
    points = 50

    [[result]]
    name = "x_peak"
    expr = "peak(x)"
    unit = "mm"

    [[result]]
    name = "x_end"
    expr = "final(x)"
    unit = "mm"

    [[criterion]]
    name = "displacement after the pulse"
    demand = "peak(x)"
    capacity = "x_cap"
    unit = "mm"
    """


@pytest.mark.parametrize("where", ["V", "Q"])
def test_short_pulse_is_felt(tmp_path, where):
    report = report_of(tmp_path, pulse_calc(where))
    m, k, F0, t1, t2, T = 10.0, 1000.0, 1000.0, 0.5, 0.501, 2.0
    omega = math.sqrt(k / m)
    amplitude = 2 * F0 / k * math.sin(omega * (t2 - t1) / 2)                       # 9.99996 mm
    x_end = F0 / k * (math.cos(omega * (T - t2)) - math.cos(omega * (T - t1)))
    assert result(report, "x_peak") == pytest.approx(1000 * amplitude, rel=1e-6)
    assert result(report, "x_end") == pytest.approx(1000 * x_end, rel=1e-5, abs=1e-6)
    row = report.criteria[0]
    assert not row.passed and row.ratio == pytest.approx(1000 * amplitude / 5.0, rel=1e-6)
    assert "3 segment(s)" in check(report, "solver")[0].detail
    assert all(c.passed for c in check(report, "energy")), check(report, "energy")
    assert all(c.passed for c in check(report, "integrators"))


def test_pulse_times_are_breakpoints(tmp_path):
    spec, d = derivation_of(tmp_path, pulse_calc("V"))
    found = simulate.find_switches(d, spec.parameter_values, spec.time_history, None)
    assert found.times == pytest.approx((0.5, 0.501), abs=1e-14)
    assert found.limit is None


def test_smooth_calc_has_no_switches(tmp_path):
    """Without step/sign/abs/min/max/Piecewise the runs take the single solve_ivp path as before."""
    text = pulse_calc("V").replace(" - F0*x*(step(t - t1) - step(t - t2))", "")
    spec, d = derivation_of(tmp_path, text)
    found = simulate.find_switches(d, spec.parameter_values, spec.time_history, None)
    assert not found.any and found is not None and found.times == ()
    report = report_of(tmp_path, text, name="smooth.toml")
    assert "segment" not in check(report, "solver")[0].detail


def test_arguments_of_every_switching_function():
    x, v = sp.symbols("x v", real=True)
    expr = (sp.Min(x, 2 * x + 1) + sp.Max(v, 0) + sp.Piecewise((x, x < 3), (0, True))
            + sp.Heaviside(TIME - 1) * sp.Abs(x - TIME))
    found = {sign * a for a in switches._arguments(expr) for sign in (1, -1)}   # the sign of u is immaterial
    assert {x - (2 * x + 1), v, x - 3, TIME - 1, x - TIME} <= found


def test_step_limit_never_reaches_the_switch():
    """Coasting at 1 m/s towards a switch at x = 0.5: each limited step covers half the distance left."""
    class Fake:
        q = (sp.Symbol("x", real=True),)
        qd = (sp.Symbol("xd", real=True),)
    limit = switches.StepLimit(Fake, {}, [Fake.q[0] - sp.Rational(1, 2)], np.array([1e-12, 1e-12]), 2.0)
    x, steps = 0.0, 0
    while 0.5 - x > 1e-9:
        h = limit(0.0, [x, 1.0], [1.0, 0.0])
        assert x + h < 0.5 + 1e-12 + limit.floor
        x, steps = x + h, steps + 1
    assert steps < 40                                   # ≈ log2(0.5 / 1e-9)
    assert limit(0.0, [0.2, 0.0], [0.0, 0.0]) == np.inf  # at rest: no limit
    assert limit(0.0, [0.7, 1.0], [1.0, 0.0]) == np.inf  # moving away from the switch: no limit


def test_stuck_block_breaks_away_at_a_pulse(tmp_path):
    """A block held by Coulomb friction μ m g, pushed by F0 > μ m g for τ = 2 ms from t1.

    Reference (constant-acceleration kinematics): it slides with a = (F0 − μ m g)/m during the pulse,
    reaching v = a τ and s1 = a τ²/2, then decelerates at μ g to rest after s2 = v²/(2 μ g).
    """
    text = """
    [calc]
    number = "S-3"
    title = "block on a rough floor pushed by a short pulse"

    [parameters]
    m = "2 kg"
    mu = "0.3"
    g = "9.81 m/s^2"
    F0 = "100 N"
    t1 = "0.2 s"
    t2 = "0.202 s"

    [coordinates]
    x = "mm"

    [energy]
    kinetic = "m/2*dot(x)**2"
    dissipation = "mu*m*g*abs(dot(x))"

    [generalized_forces]
    x = "F0*(step(t - t1) - step(t - t2))"

    [initial]
    x = "0 mm"
    "dot(x)" = "0 m/s"

    [analysis]
    equilibrium = false

    [time_history]
    duration = "0.5 s"
    points = 20

    [[result]]
    name = "x_end"
    expr = "final(x)"
    unit = "mm"
    """
    report = report_of(tmp_path, text)
    m, mu, g, F0, tau = 2.0, 0.3, 9.81, 100.0, 0.002
    a = (F0 - mu * m * g) / m
    v = a * tau
    s = a * tau**2 / 2 + v**2 / (2 * mu * g)
    assert result(report, "x_end") == pytest.approx(1000 * s, rel=1e-6)
    assert all(c.passed for c in check(report, "integrators"))


def test_coarse_note_names_no_empty_series(tmp_path):
    """At rest in equilibrium, sampled more coarsely than the 5 Hz mode: the note must not say
    'of the range of .' (there is no series that departs)."""
    text = pulse_calc("V").replace(" - F0*x*(step(t - t1) - step(t - t2))", "").replace(
        "points = 50", "points = 10")
    report = report_of(tmp_path, text)
    note = report.time_history.sampling_note
    assert note.startswith("coarse sampling")
    assert "range of ." not in note and "follow the dense solution within 1 %" in note


def test_two_roots_between_scan_points_are_found():
    """u = (t − 0.30003)(t − 0.30004) dips below zero for 10 µs, inside one scan interval (2 s / 20 000 =
    100 µs): the plain scan sees no sign change; both roots are the closed-form ones."""
    u = (TIME - sp.Float(0.30003)) * (TIME - sp.Float(0.30004))
    assert switches.breakpoints([u], 2.0) == pytest.approx((0.30003, 0.30004), abs=1e-12)
    assert switches.hidden_roots(TIME - sp.Float(0.5), 2.0) == pytest.approx([0.5], abs=1e-14)
    # A root next to a scan point where u is exactly zero (t = 0.5 s is one): the 50 µs pulse ends too.
    pulse = (TIME - sp.Float(0.5)) * (sp.Float(0.50005) - TIME)
    assert switches.breakpoints([pulse], 2.0) == pytest.approx((0.5, 0.50005), abs=1e-12)


def test_a_step_load_at_an_unround_time_is_a_breakpoint(tmp_path):
    """A force F·step(t − t1) on a spring-mass at rest: x_max = 2F/k, the dynamic load factor
    of a suddenly applied constant force (closed form of the step response, x = F/k (1 − cos ωt)).
    Both the energy audit's switch records and the breakpoint scan see t1 = 0.137 s."""
    report = report_of(tmp_path, """
        [calc]
        number = "B-15"
        title = "step load at t1"
        [parameters]
        m = "1 kg"
        k = "100 N/m"
        F = "10 N"
        t1 = "0.137 s"
        [coordinates]
        x = "mm"
        [energy]
        kinetic = "m/2*dot(x)**2"
        potential = "k/2*x**2"
        [generalized_forces]
        x = "F*step(t - t1)"
        [initial]
        x = "0 mm"
        "dot(x)" = "0 m/s"
        [time_history]
        duration = "1 s"
        points = 100
        [[result]]
        name = "xmax"
        expr = "max(x)"
        unit = "mm"
        """)
    assert report.error is None, report.error
    assert report.passed, [c for c in report.checks if not c.passed]
    assert result(report, "xmax") == pytest.approx(2 * 10 / 100 * 1000, rel=1e-7)
