"""Extremes between samples: peaks, criteria and summaries from the dense solution (issue 12, item 1).

The reference for the buffer cases is energy conservation for a mass m dropped
from rest a height h above a linear one-sided spring k: at the largest
compression δ the kinetic energy is zero again, so m g (h + δ) = k δ²/2 and

    δ = (m g + sqrt((m g)² + 2 k m g h)) / k,

the elementary work-energy result of any dynamics text.
"""

from __future__ import annotations

import io
import math

import numpy as np
import pytest

from calcsheaf.commands.check import check as check_command
from calcsheaf.verification.extremes import extremes, switching_times
from helpers_calc import check, report_of, result, write_calc

G = 9.80665


def buffer_calc(m: float, k: float, h: float, points: int, duration: float, stroke_mm: float) -> str:
    return f"""
    [calc]
    number = "X-1"
    title = "mass dropped onto a one-sided buffer"

    [parameters]
    m = "{m} kg"
    k = "{k} N/m"
    g = "{G} m/s^2"
    stroke = "{stroke_mm} mm"
    F_rated = "{k * stroke_mm / 1000} N"

    [coordinates]
    x = {{ unit = "mm", label = "compression of the buffer, positive down" }}

    [energy]
    kinetic = "m/2*dot(x)**2"
    potential = "-m*g*x + k/2*x**2*step(x)"

    [initial]
    x = "{-h} m"
    "dot(x)" = "0 m/s"

    [analysis]
    equilibrium = false
    modes = false

    [time_history]
    duration = "{duration} s"
    points = {points}

    [[output]]
    name = "F_buf"
    expr = "k*x*step(x)"
    unit = "kN"
    label = "buffer force"

    [[result]]
    name = "delta"
    expr = "max(x)"
    unit = "mm"

    [[criterion]]
    name = "compression within the stroke"
    demand = "max(x)"
    capacity = "stroke"

    [[criterion]]
    name = "buffer force within its rating"
    demand = "peak(F_buf)"
    capacity = "F_rated"
    """


def compression(m: float, k: float, h: float) -> float:
    """Largest compression from m g (h + δ) = k δ²/2 (energy conservation), m."""
    return (m * G + math.sqrt((m * G) ** 2 + 2 * k * m * G * h)) / k


def criterion(report, name):
    return next(c for c in report.criteria if c.name == name)


def test_buffer_drop_with_coarse_samples_reports_the_true_compression_and_fails(tmp_path):
    """0.3 m drop onto 200 kN/m with points = 50: the samples read 0.6 % low and would pass."""
    m, k, h = 50.0, 2e5, 0.3
    delta = compression(m, k, h)
    stroke = 0.997 * delta * 1000          # between the sampled and the true compression
    report = report_of(tmp_path, buffer_calc(m, k, h, 50, 0.35, stroke))
    assert report.error is None
    sampled = float(np.max(report.time_history.series[0].values))
    assert sampled < stroke                # the stored samples alone would pass the criterion
    assert result(report, "delta") == pytest.approx(delta * 1000, rel=1e-7)
    row = criterion(report, "compression within the stroke")
    assert row.ratio == pytest.approx(1 / 0.997, rel=1e-6) and not row.passed
    assert not report.passed
    summary = next(o for o in report.outputs if o.name == "F_buf")
    assert summary.peak == pytest.approx(k * delta / 1000, rel=1e-7)
    assert summary.max == pytest.approx(k * delta / 1000, rel=1e-7)
    # The time of the largest compression: free fall sqrt(2h/g), then a quarter-plus of the
    # contact oscillation about the static deflection m g / k (scipy-free closed form).
    w = math.sqrt(k / m)
    v_impact = math.sqrt(2 * G * h)
    s = m * G / k
    t_contact = (math.pi / 2 + math.atan(s * w / v_impact)) / w
    assert summary.t_max == pytest.approx(math.sqrt(2 * h / G) + t_contact, rel=1e-6)


def test_stiff_buffer_between_samples_is_not_missed(tmp_path):
    """The whole impact (0.44 ms) falls between two of 400 samples; the demand is still found."""
    m, k, h = 10.0, 5e8, 0.1
    delta = compression(m, k, h)
    report = report_of(tmp_path, buffer_calc(m, k, h, 400, 0.3, 2 * delta * 1000))
    assert report.error is None
    sampled = float(np.max(report.time_history.series[0].values))
    assert sampled < 0.5 * delta * 1000    # the samples see less than half the compression
    assert result(report, "delta") == pytest.approx(delta * 1000, rel=1e-6)
    row = criterion(report, "buffer force within its rating")
    assert row.demand == pytest.approx(k * delta, rel=1e-6)            # N
    assert row.ratio == pytest.approx(0.5, rel=1e-6)
    # Coarse sampling is said, with the contact frequency sqrt(k/m)/2π as the fastest seen.
    note = report.time_history.sampling_note
    assert note.startswith("coarse sampling")
    assert report.time_history.fastest_hz == pytest.approx(math.sqrt(k / m) / (2 * math.pi), rel=0.02)
    sampling = check(report, "sampling")
    assert len(sampling) == 1 and sampling[0].passed and sampling[0].detail == note


def test_integrators_are_compared_on_every_step_and_twenty_points_per_period(tmp_path):
    m, k, h = 10.0, 5e8, 0.1
    report = report_of(tmp_path, buffer_calc(m, k, h, 400, 0.3, 1e3))
    th = report.time_history
    f_contact = math.sqrt(k / m) / (2 * math.pi)
    assert th.comparison_points >= 20 * f_contact * 0.3
    agree = check(report, "integrators")[0]
    assert agree.passed and f"at {th.comparison_points} times" in agree.detail


def test_well_sampled_motion_has_no_coarse_note(tmp_path):
    report = report_of(tmp_path, """
    [calc]
    number = "X-2"
    title = "mass on a spring"

    [parameters]
    m = "1 kg"
    k = "100 N/m"

    [coordinates]
    x = { unit = "m" }

    [energy]
    kinetic = "m/2*dot(x)**2"
    potential = "k/2*x**2"

    [initial]
    x = "0.1 m"
    "dot(x)" = "0 m/s"

    [time_history]
    duration = "2 s"
    points = 400

    [[result]]
    name = "x_min"
    expr = "min(x)"
    unit = "m"
    """)
    assert report.passed
    assert report.time_history.sampling_note == ""
    # 1.59 Hz linearised: 20 per period over 2 s is 64 points at least.
    assert report.time_history.fastest_basis == "linearised"
    assert result(report, "x_min") == pytest.approx(-0.1, rel=1e-9)


def test_check_command_prints_the_coarse_sampling_note(tmp_path):
    root = tmp_path / "p"
    (root / "calcs").mkdir(parents=True)
    (root / "project.toml").write_text('[project]\nnumber = "P-1"\nname = "Extremes"\n')
    write_calc(root / "calcs", buffer_calc(10.0, 5e8, 0.1, 400, 0.3, 1e3), "x1.toml")
    out, err = io.StringIO(), io.StringIO()
    check_command(root, out=out, err=err)
    assert "note: samples resolve the motion: coarse sampling: 400 samples" in out.getvalue()


# ---- the extremes finder on known functions -----------------------------------------
def test_peak_between_grid_points_is_refined():
    """max of sin(ωt) on a grid that straddles the crest: exactly 1 at π/(2ω)."""
    w = 7.0
    t = np.linspace(0.0, 1.0, 6)
    found = extremes(t, np.sin(w * t), lambda s: math.sin(w * s))
    assert found.max == pytest.approx(1.0, abs=1e-12)
    assert found.t_max == pytest.approx(math.pi / (2 * w), abs=1e-6)
    assert found.min == pytest.approx(-1.0, abs=1e-12)
    assert found.t_min == pytest.approx(3 * math.pi / (2 * w), abs=1e-6)


def test_jump_between_grid_points_is_taken_at_its_switching_time():
    """F step(t − t1) − drop(t): the largest value is just after the jump, found at the switch."""
    t1 = 0.4321

    def value(s):
        return (1.0 if s > t1 else 0.0) - 0.5 * max(s - t1, 0.0)

    t = np.linspace(0.0, 1.0, 5)
    times = switching_times(t, [t - t1], lambda j, s: s - t1)
    assert times == [pytest.approx(t1, abs=1e-14)]
    found = extremes(t, np.array([value(s) for s in t]), value, times)
    assert found.max == pytest.approx(1.0, abs=1e-8)
    assert found.t_max == pytest.approx(t1, abs=1e-8)


def test_peak_beyond_the_neighbour_bound_of_another_peak_is_refined():
    """Two crests: one sampled at its top (1.0), a higher one (1.05) between samples.

    The higher crest's samples are 0.82 and 0.73; only the larger of its rises
    (0.82 above its far neighbour) says it could beat 1.0.  Gaussian crests
    exp(−d²/0.01) at t = 0 and 1.05·exp(−(t − 1)²/0.01) (overlap below 1e-40).
    """
    def value(s):
        return math.exp(-s * s / 0.01) + 1.05 * math.exp(-(s - 1) ** 2 / 0.01)

    t = np.array([-0.5, 0.0, 0.5, 0.95, 1.06, 1.5])
    found = extremes(t, np.array([value(s) for s in t]), value)
    assert found.max == pytest.approx(1.05, rel=1e-12)
    assert found.t_max == pytest.approx(1.0, abs=1e-6)


def test_jump_that_no_grid_point_shows_is_found_at_its_switching_time():
    """After the jump at t1 the value drops within 10 ms and only then rises slowly.

    No grid value shows the top of the jump and no local maximum of the grid
    could reach it: only the one-sided value at the switching time does.
    """
    t1, tau = 0.4321, 0.01

    def value(s):
        if s < t1:
            return 0.0
        return 1.0 - 0.5 * (1.0 - math.exp(-(s - t1) / tau)) + 0.2 * (s - t1)

    t = np.linspace(0.0, 1.0, 5)
    times = switching_times(t, [t - t1], lambda j, s: s - t1)
    found = extremes(t, np.array([value(s) for s in t]), value, times)
    assert found.max == pytest.approx(1.0, abs=1e-6)
    assert found.t_max == pytest.approx(t1, abs=1e-8)
    assert extremes(t, np.array([value(s) for s in t]), value).max < 0.7     # without the switch


def test_short_pulse_written_with_step_is_caught_between_samples(tmp_path):
    """Output k x + F0 step(t − t1) e^(−(t − t1)/τ) with τ = 1 ms and samples every 5 ms.

    Reference: the undamped oscillator x = x0 cos(ω t), ω = sqrt(k/m), so the
    peak is k x0 cos(ω t1) + F0 (t1 chosen where the spring force is near its top).
    """
    m, k, x0, F0, t1 = 1.0, 100.0, 0.1, 50.0, 2 * math.pi / 10.0
    report = report_of(tmp_path, f"""
    [calc]
    number = "X-3"
    title = "pulse on a spring-mass"

    [parameters]
    m = "{m} kg"
    k = "{k} N/m"
    F0 = "{F0} N"
    t1 = "{t1} s"
    tau = "1 ms"

    [coordinates]
    x = {{ unit = "m" }}

    [energy]
    kinetic = "m/2*dot(x)**2"
    potential = "k/2*x**2"

    [initial]
    x = "{x0} m"
    "dot(x)" = "0 m/s"

    [time_history]
    duration = "2 s"
    points = 401

    [[output]]
    name = "F_tot"
    expr = "k*x + F0*step(t - t1)*exp(-(t - t1)/tau)"
    unit = "N"

    [[result]]
    name = "F_max"
    expr = "max(F_tot)"
    unit = "N"
    """)
    assert report.error is None
    expected = k * x0 * math.cos(math.sqrt(k / m) * t1) + F0
    assert result(report, "F_max") == pytest.approx(expected, rel=1e-6)
    sampled = next(s for s in report.time_history.series if s.name == "F_tot").values
    assert float(np.max(sampled)) < 0.5 * expected


def test_observed_frequency_sees_an_oscillation_riding_on_a_steady_acceleration():
    """q = a0 t²/2 + A sin ωt (a hoisted load oscillating on its rope): the frequency seen
    is ω/2π (3 % for the finite-difference q̈ on 4000 samples), not the much lower ratio
    of the steady acceleration to the growing speed.  Exact for the pure sine."""
    from calcsheaf.mechanics.simulate import observed_frequency

    t = np.linspace(0.0, 2.0, 4001)
    w, A, a0 = 2 * np.pi * 15.0, 1e-3, 5.0
    q = a0 * t**2 / 2 + A * np.sin(w * t)
    v = a0 * t + A * w * np.cos(w * t)
    assert observed_frequency(t, np.vstack([q, v]), 1) == pytest.approx(15.0, rel=0.03)
    pure = np.vstack([A * np.sin(w * t), A * w * np.cos(w * t)])
    assert observed_frequency(t, pure, 1) == pytest.approx(15.0, rel=1e-3)
