"""Defects an independent checker found after issue 12 (D3 to D5), each with its reference.

D3: a load switched on with step(t) at t = 0, the equilibrium it gives and the
period/log_decrement measured about it.  D4: angular rates (rpm, rad/s) never mixed
with cyclic frequencies (Hz, frequency queries) without 2π.  D5: crosscheck
comparisons that cannot fail on their own, and two display details.
"""

from __future__ import annotations

import math
import textwrap

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from calcsheaf.calcfile.loader import load_calc
from calcsheaf.errors import ProblemList

from helpers_calc import check, report_of, result, write_calc


def calc(body: str, number: str = "F-1", title: str = "checker finding") -> str:
    return f'[calc]\nnumber = "{number}"\ntitle = "{title}"\n' + textwrap.dedent(body)


# --------------------------------------------------------------------------------------
# D3: a step load at t = 0 (the checker's a15-step-at-zero)
# --------------------------------------------------------------------------------------
M, K, C, F0 = 10.0, 1000.0, 20.0, 100.0
WN = math.sqrt(K / M)                       # 10 rad/s
ZETA = C / (2 * math.sqrt(K * M))           # 0.1
WD = WN * math.sqrt(1 - ZETA ** 2)


def step_calc(load: str = "F0*x*step(t)", extra: str = "") -> str:
    return calc(f"""
    [parameters]
    m = "{M} kg"
    k = "{K} N/m"
    c = "{C} N*s/m"
    F0 = "{F0} N"
    t1 = "0.3 s"

    [coordinates]
    x = "mm"

    [energy]
    kinetic = "m/2*dot(x)**2"
    potential = "k/2*x**2 - {load}"
    dissipation = "c/2*dot(x)**2"

    [initial]
    x = "0 mm"
    "dot(x)" = "0 m/s"

    [time_history]
    duration = "2 s"
    points = 2000

    [[result]]
    name = "x_eq"
    expr = "equilibrium(x)"
    unit = "mm"
    [[result]]
    name = "ld"
    expr = "log_decrement(x)"
    [[result]]
    name = "T_per"
    expr = "period(x)"
    unit = "s"
    {extra}
    """)


def test_step_load_at_zero_acts_in_full_in_the_equilibrium_and_the_oscillation(tmp_path):
    report = report_of(tmp_path, step_calc())
    # Closed forms of the viscously damped SDOF under a step load (S. S. Rao, Mechanical
    # Vibrations, 6th ed., free vibration with viscous damping and the response to a step;
    # the formulas, not the section numbers, are relied on): static deflection F0/k,
    # log decrement 2πζ/√(1−ζ²), damped period 2π/ω_d.
    assert result(report, "x_eq") == pytest.approx(1000 * F0 / K, rel=1e-12)      # 100 mm
    assert result(report, "ld") == pytest.approx(2 * math.pi * ZETA / math.sqrt(1 - ZETA ** 2), rel=1e-6)
    assert result(report, "T_per") == pytest.approx(2 * math.pi / WD, rel=1e-6)    # 0.6315 s
    assert report.equilibrium.kind == "static, time frozen"
    note = report.equilibrium.note
    assert "t = 0⁺" in note and "step(t) switching at t = 0 s taken as just after the switch" in note


def test_step_switched_later_measures_about_the_level_of_the_oscillation(tmp_path):
    # The load comes on at t1 = 0.3 s: the equilibrium at t = 0⁺ is the unloaded rest 0,
    # but the motion after t1 oscillates about F0/k.  The period and the decrement are the
    # same closed forms as above (Rao, as above); the equilibrium must not be used as the level.
    report = report_of(tmp_path, step_calc("F0*x*step(t - t1)"))
    assert result(report, "x_eq") == pytest.approx(0.0, abs=1e-12)
    assert result(report, "ld") == pytest.approx(2 * math.pi * ZETA / math.sqrt(1 - ZETA ** 2), rel=1e-6)
    assert result(report, "T_per") == pytest.approx(2 * math.pi / WD, rel=1e-6)


def test_stiffness_switched_at_zero_gives_the_full_stiffness_mode(tmp_path):
    # k switched in with step(t): the modes about the t = 0⁺ equilibrium use k, not k/2.
    # Reference: f_n = √(k/m)/2π (Rao, as above).
    text = step_calc().replace('potential = "k/2*x**2 - F0*x*step(t)"',
                               'potential = "k/2*x**2*step(t) - F0*x*step(t)"')
    text += '\n[[result]]\nname = "f1"\nexpr = "natural_frequency(1)"\n'
    report = report_of(tmp_path, text)
    assert result(report, "f1") == pytest.approx(WN / (2 * math.pi), rel=1e-9)
    assert result(report, "x_eq") == pytest.approx(1000 * F0 / K, rel=1e-12)


def test_momentum_step_in_T_says_time_enters_T_not_nothing_depends_on_time(tmp_path):
    # The checker's a07b: T = m/2 ẋ² + F0 t1 ẋ step(t − t1).
    report = report_of(tmp_path, calc("""
    [parameters]
    m = "3 kg"
    k = "1200 N/m"
    F0 = "50 N"
    t1 = "0.3 s"
    [coordinates]
    x = "mm"
    [energy]
    kinetic = "m/2*dot(x)**2 + F0*t1*dot(x)*step(t - t1)"
    potential = "k/2*x**2"
    [initial]
    x = "0 mm"
    "dot(x)" = "0 m/s"
    """))
    note = report.equilibrium.note
    assert "nothing depends on time" not in note
    assert note.startswith("every velocity zero; time enters T, but not the equations of motion")


def test_unexpected_instability_without_an_analysis_table_says_add_the_table(tmp_path):
    # The checker's a04 idea in one DOF: negative stiffness, no [analysis] table.
    report = report_of(tmp_path, calc("""
    [parameters]
    m = "1 kg"
    k = "-100 N/m"
    [coordinates]
    x = "mm"
    [energy]
    kinetic = "m/2*dot(x)**2"
    potential = "k/2*x**2"
    [initial]
    x = "0 mm"
    "dot(x)" = "0 m/s"
    """))
    (failed,) = [c for c in check(report, "stability") if not c.passed]
    assert "analysis.expect_unstable" not in failed.detail
    assert failed.detail.startswith(f"{tmp_path / 'calc.toml'}: analysis: unstable")
    assert failed.detail.endswith("add an [analysis] table with expect_unstable = true")


# --------------------------------------------------------------------------------------
# D4: rpm and Hz (the checker's a09-rpm)
# --------------------------------------------------------------------------------------
def rpm_calc(rows: str, speed: str = "1480 rpm") -> str:
    return calc(f"""
    [parameters]
    m = "10 kg"
    k = "39.478 kN/m"
    f_run = "{speed}"

    [coordinates]
    x = "mm"

    [energy]
    kinetic = "m/2*dot(x)**2"
    potential = "k/2*x**2"

    [initial]
    x = "0 mm"
    "dot(x)" = "0 m/s"
    """) + textwrap.dedent(rows)


def refused(tmp_path, text) -> list[str]:
    with pytest.raises(ProblemList) as caught:
        load_calc(write_calc(tmp_path, text))
    return [str(p) for p in caught.value.problems]


def test_rpm_shown_in_hz_is_refused_with_the_2pi_fix(tmp_path):
    text = rpm_calc('[[result]]\nname = "f_shown"\nexpr = "f_run"\nunit = "Hz"\n')
    line = text.splitlines().index('expr = "f_run"') + 1
    (message,) = refused(tmp_path, text)
    assert message == (
        f"{tmp_path / 'calc.toml'}:{line}: result[1].expr: the value is shown in Hz (cycles per second) "
        "but is 'f_run' (an angular rate: pint reads rpm as 2π/60 rad/s) Fix: divide by 2*pi for "
        "a frequency in Hz, e.g. f_run/(2*pi), or give the speed in Hz (a speed in rpm / 60 is in "
        "Hz); multiply a frequency by 2*pi for rad/s or rpm")


def test_criterion_comparing_a_frequency_with_rpm_is_refused(tmp_path):
    (message,) = refused(tmp_path, rpm_calc(
        '[[criterion]]\nname = "f1 below a third of the speed"\n'
        'demand = "natural_frequency(1)"\ncapacity = "f_run/3"\n'))
    assert "criterion[1].capacity: the criterion compares a cyclic frequency in Hz with an " \
           "angular rate ('f_run/3'" in message
    assert "Fix: divide the angular rate by 2*pi, e.g. (f_run/3)/(2*pi)" in message


@pytest.mark.parametrize("expr, unit", [
    ("natural_frequency(1)/f_run", None),       # a ratio off by 2π
    ("natural_frequency(1)", "rpm"),            # the converse: Hz shown as rpm
    ("1/period(x)", "rad/s"),                   # 1/period is in Hz
    ("frf_peak_frequency(x) + f_run", None),     # a sum of the two kinds
    ("2*f_run", "kHz"),                         # an angular rate shown in kHz
    ("max(natural_frequency(1), f_run)", None),  # through max()
    ("abs(f_run)/3", "Hz"),                     # through abs()
])
def test_other_mixings_are_refused(tmp_path, expr, unit):
    row = f'[[result]]\nname = "r"\nexpr = "{expr}"\n' + (f'unit = "{unit}"\n' if unit else "")
    (message,) = refused(tmp_path, rpm_calc(row))
    assert "result[1].expr" in message and "2*pi" in message


def test_explicit_2pi_conversions_load_and_give_the_right_values(tmp_path):
    # 1480 rpm = 1480/60 Hz = 24.667 Hz (definition of the revolution per minute);
    # f1 = √(k/m)/2π = 10.0 Hz (closed form), so f1 ≤ f_run/3 fails with D/C 1.216,
    # the checker's Hz twin of the criterion.
    report = report_of(tmp_path, rpm_calc("""
    [[result]]
    name = "f_hz"
    expr = "f_run/(2*pi)"
    unit = "Hz"
    [[result]]
    name = "w1"
    expr = "2*pi*natural_frequency(1)"
    unit = "rpm"
    [[result]]
    name = "ratio"
    expr = "2*pi*natural_frequency(1)/f_run"
    [[result]]
    name = "k_run"
    expr = "m*f_run**2"
    unit = "N/m"
    [[result]]
    name = "c_like"
    expr = "k_run/natural_frequency(1)"
    unit = "N*s/m"
    [[criterion]]
    name = "f1 below a third of the running speed"
    demand = "natural_frequency(1)"
    capacity = "f_hz/3"
    """))
    f1 = math.sqrt(39478.0 / 10.0) / (2 * math.pi)
    assert result(report, "f_hz") == pytest.approx(1480 / 60, rel=1e-12)
    assert result(report, "w1") == pytest.approx(f1 * 60, rel=1e-9)
    assert result(report, "ratio") == pytest.approx(f1 / (1480 / 60), rel=1e-9)
    # a stiffness m Ω² is not a rate: it carries no kind into later expressions
    assert result(report, "c_like") == pytest.approx(10 * (1480 * 2 * math.pi / 60) ** 2 / f1, rel=1e-9)
    (row,) = report.criteria
    assert row.ratio == pytest.approx(f1 / (1480 / 60 / 3), rel=1e-9) and not row.passed


def test_frf_at_a_speed_in_rpm_needs_the_conversion(tmp_path):
    text = rpm_calc('[[result]]\nname = "a"\nexpr = "frf(x, f_run)"\n')
    text = text.replace("[initial]", '[frequency_response]\nforce = { x = "1 N" }\nfrom = "0 Hz"\n'
                                     'to = "50 Hz"\n\n[initial]')
    (message,) = refused(tmp_path, text)
    assert "the frequency of frf() is in Hz, but 'f_run' is an angular rate" in message


# --------------------------------------------------------------------------------------
# D5: crosschecks that cannot fail (the checker's a08-crosscheck) and display details
# --------------------------------------------------------------------------------------
XBASE = calc("""
[parameters]
m = "4 kg"
k = "1600 N/m"
c = "0 N*s/m"
x0 = "10 mm"
t_tiny = "1 ns"
t_late = "0.2 s"

[coordinates]
x = "mm"

[energy]
kinetic = "m/2*dot(x)**2"
potential = "k/2*x**2"
dissipation = "c/2*dot(x)**2"

[initial]
x = "10 mm"
"dot(x)" = "0 m/s"

[time_history]
duration = "1 s"
points = 1000

[[result]]
name = "k_und"
expr = "m*(2*pi*undamped_frequency(1))**2"
unit = "N/m"
""")


def test_undamped_frequency_fed_back_is_the_same_mode_family(tmp_path):
    # k = m (2π f_u)² reproduces f_n = √(k/m)/2π identically (Rao, as above): no test.
    report = report_of(tmp_path, XBASE + """
[[crosscheck]]
case = "sdof_viscous"
inputs = { m = "m", k = "k_und", c = "c" }
compare = { natural_frequency_hz = "natural_frequency(1)" }
""")
    (row,) = report.crosschecks
    assert not row.independent and not row.passed
    assert row.dependence.startswith("handbook input k is computed from mode 1 (its frequency family)")


def test_sample_a_nanosecond_after_the_start_is_the_initial_state(tmp_path):
    report = report_of(tmp_path, XBASE + """
[[crosscheck]]
case = "sdof_free_response"
inputs = { m = "m", k = "k", c = "c", x0 = "x0", v0 = "0", t1 = "t_tiny" }
compare = { displacement_m = "at(x, t_tiny)" }

[[crosscheck]]
case = "sdof_free_response"
inputs = { m = "m", k = "k", c = "c", x0 = "x0", v0 = "0", t1 = "t_late" }
compare = { displacement_m = "at(x, t_late)" }
""")
    early, late = report.crosschecks
    assert not early.independent and "initial state" in early.dependence
    # x(0.2 s) = x0 cos(ω_n t), ω_n = 20 rad/s (closed form; Rao, as above): independent, passes.
    assert late.independent and late.passed
    assert late.computed == pytest.approx(0.01 * math.cos(20 * 0.2), rel=1e-7)


def test_equilibrium_of_an_angle_is_shown_in_the_coordinate_unit(tmp_path):
    # Pendulum at rest hanging down: θ_eq = 0 (statics), unit of θ: rad.
    spec = load_calc(write_calc(tmp_path, calc("""
    [parameters]
    m = "1 kg"
    L = "1 m"
    g = "9.81 m/s^2"
    [coordinates]
    theta = "rad"
    psi = "deg"
    [energy]
    kinetic = "m/2*L**2*(dot(theta)**2 + dot(psi)**2)"
    potential = "-m*g*L*(cos(theta) + cos(psi))"
    [initial]
    theta = "0.1 rad"
    psi = "5 deg"
    "dot(theta)" = "0 rad/s"
    "dot(psi)" = "0 rad/s"
    [[result]]
    name = "th_eq"
    expr = "equilibrium(theta)"
    [[result]]
    name = "psi_eq"
    expr = "equilibrium(psi)"
    """)))
    assert [(r.name, r.unit) for r in spec.results] == [("th_eq", "rad"), ("psi_eq", "deg")]
    assert spec.results[1].factor == pytest.approx(math.pi / 180)


def test_step_load_reference_by_solve_ivp_matches_the_closed_forms():
    """The outside computation behind the D3 closed forms: scipy solve_ivp of
    m ẍ + c ẋ + k x = F0 from rest; maxima spacing and the decrement about F0/k."""
    sol = solve_ivp(lambda t, y: [y[1], (F0 - C * y[1] - K * y[0]) / M], (0, 2), [0, 0],
                    rtol=1e-11, atol=1e-13, dense_output=True, method="DOP853")
    t = np.linspace(0, 2, 200001)
    x, v = sol.sol(t)
    tops = np.nonzero((v[:-1] > 0) & (v[1:] <= 0))[0]
    peaks = x[tops] - F0 / K
    assert np.diff(t[tops]).mean() == pytest.approx(2 * math.pi / WD, rel=1e-4)
    assert math.log(peaks[0] / peaks[1]) == pytest.approx(2 * math.pi * ZETA / math.sqrt(1 - ZETA ** 2), rel=1e-4)


def test_coarse_sampling_note_of_a_motionless_record_names_no_empty_series(tmp_path):
    # At rest from the start (x0 = 0, no load): no series moves, but 10 samples in 1 s
    # are fewer than 20 per period of f_n = √(k/m)/2π = 1.59 Hz (closed form), so the note
    # is given, without the departure clause that needs a named series.
    report = report_of(tmp_path, calc("""
    [parameters]
    m = "1 kg"
    k = "100 N/m"
    [coordinates]
    x = "mm"
    [energy]
    kinetic = "m/2*dot(x)**2"
    potential = "k/2*x**2"
    [initial]
    x = "0 mm"
    "dot(x)" = "0 m/s"
    [time_history]
    duration = "1 s"
    points = 10
    """))
    note = report.time_history.sampling_note
    assert note.startswith("coarse sampling: 10 samples (every 0.111 s) give 5.65 per period")
    assert "range of ." not in note and "departs" not in note
