"""Pendulums: simple (small and large amplitude) and physical (compound).

Sign convention: theta is the angle of the pendulum from the downward vertical,
rad; theta0 is the release amplitude (released from rest).
"""

from __future__ import annotations

import math

from scipy.special import ellipk

from .calctext import header
from .case import Case, Quantity, ValidityLimit

FAMILY = "pendulums"

SMALL_ANGLE_LIMIT = 0.1265   # rad: theta0^2/16 < 1e-3, the period error of the small-angle form

MERIAM = ('J. L. Meriam and L. G. Kraige, Engineering Mechanics: Dynamics, 7th ed., '
          'Wiley 2012, vibration of particles and rigid bodies (simple and compound '
          'pendulum)')
MERIAM_NOTE = ('Book and edition recalled (from memory); the section numbers 8/2 and '
               '6/4 once cited here was recalled and is not checked against a copy, '
               'so the sheets name the topic only. The closed form itself is tested '
               'in tests/test_handbook_mechanics.py.')
LANDAU = ('L. D. Landau and E. M. Lifshitz, Mechanics, 3rd ed., Pergamon 1976, motion '
          'in one dimension (period of a pendulum of any amplitude); M. Abramowitz '
          'and I. A. Stegun, Handbook of Mathematical Functions, 1964, elliptic '
          'integrals')
LANDAU_NOTE = ('Books and editions recalled (from memory); section 11 problem 1 of '
               'Landau and Lifshitz and section 17.3 of Abramowitz and Stegun, once '
               'cited here, were recalled and are not checked against a copy. The '
               "closed form 4 sqrt(L/g) K(sin(theta0/2)) is evaluated with scipy's "
               'ellipk and tested against numerical quadrature and integration in '
               'tests/test_handbook_mechanics.py.')


def small_angle_limit() -> ValidityLimit:
    return ValidityLimit(
        f"small amplitude: theta0 <= {SMALL_ANGLE_LIMIT} rad (period error theta0^2/16 < 1e-3)",
        lambda p: abs(p["theta0"]) <= SMALL_ANGLE_LIMIT)


def large_period(p) -> float:
    """4 sqrt(L/g) K(k), k = sin(theta0/2); scipy's ellipk takes the parameter m = k^2. s."""
    k = math.sin(p["theta0"] / 2.0)
    return 4.0 * math.sqrt(p["L"] / p["g"]) * float(ellipk(k * k))


PENDULUM_SMALL_CALC = header(
    "pendulum_small", "simple pendulum, small amplitude", MERIAM,
    [("Point mass on a massless rigid rod, frictionless pivot.", "The model of the handbook case."),
     ("Released from rest at 0.05 rad.", "Within the small-amplitude limit.")]) + """
[parameters]
m = "2 kg"
L = "0.8 m"
g = "9.80665 m/s^2"
theta_0 = "0.05 rad"

[coordinates]
theta = { unit = "rad", label = "rod angle from the downward vertical" }

[energy]
kinetic = "m/2*L**2*dot(theta)**2"
potential = "-m*g*L*cos(theta)"

[initial]
theta = "0.05 rad"
"dot(theta)" = "0 rad/s"

[time_history]
duration = "10 s"
points = 10001

[[crosscheck]]
case = "pendulum_small"
inputs = { L = "L", g = "g", theta0 = "theta_0" }
compare = { natural_frequency_hz = "natural_frequency(1)" }
tolerance = 1e-8

[[crosscheck]]
case = "pendulum_small"
inputs = { L = "L", g = "g", theta0 = "theta_0" }
compare = { period_s = "period(theta)" }
"""

PENDULUM_SMALL = Case(
    key="pendulum_small",
    title="Simple pendulum, small amplitude",
    family=FAMILY,
    inputs={"L": "m", "g": "m/s^2", "theta0": "rad"},
    provides={q.name: q for q in (
        Quantity("natural_frequency_hz", "Hz", r"f_n = \frac{1}{2\pi}\sqrt{\frac{g}{L}}",
                 lambda p: math.sqrt(p["g"] / p["L"]) / (2 * math.pi)),
        Quantity("period_s", "s", r"T_0 = 2\pi\sqrt{\frac{L}{g}}",
                 lambda p: 2 * math.pi * math.sqrt(p["L"] / p["g"])),
    )},
    limits=(small_angle_limit(),
            ValidityLimit("positive length and gravity: L > 0, g > 0",
                          lambda p: p["L"] > 0 and p["g"] > 0)),
    source=MERIAM,
    source_note=MERIAM_NOTE,
    tolerance=1e-3,
    tolerance_reason=("the small-angle period is short by about theta0^2/16, below 1e-3 "
                      "inside the validity limit; the linearised frequency itself is exact "
                      "and checked at 1e-8"),
    selftest_calc=PENDULUM_SMALL_CALC,
)


PENDULUM_LARGE_CALC = header(
    "pendulum_large", "simple pendulum, large amplitude, with rod tension", LANDAU,
    [("Point mass on a massless rigid rod, frictionless pivot; the rod length is a constraint "
      "r = L whose force is the rod tension.", "The model of the handbook case."),
     ("Released from rest at 1.2 rad.", "Large amplitude, rod stays in tension.")]) + """
[parameters]
m = "3 kg"
L = "1.5 m"
g = "9.80665 m/s^2"
theta_0 = "1.2 rad"

[coordinates]
r = { unit = "m", label = "distance of the mass from the pivot" }
theta = { unit = "rad", label = "rod angle from the downward vertical" }

[energy]
kinetic = "m/2*(dot(r)**2 + r**2*dot(theta)**2)"
potential = "-m*g*r*cos(theta)"

[[constraint]]
name = "N_rod"
equation = "r - L"
unit = "N"
label = "rod force (constraint force along r)"

[initial]
r = "1.5 m"
theta = "1.2 rad"
"dot(r)" = "0 m/s"
"dot(theta)" = "0 rad/s"

[time_history]
duration = "8 s"
points = 16001

[[crosscheck]]
case = "pendulum_large"
inputs = { L = "L", g = "g", theta0 = "theta_0", m = "m" }
compare = { period_s = "period(theta)", max_angular_speed_rad_s = "max(dot(theta))", max_rod_tension_N = "max(abs(N_rod))", min_rod_tension_N = "min(abs(N_rod))" }
"""

PENDULUM_LARGE = Case(
    key="pendulum_large",
    title="Simple pendulum, large amplitude",
    family=FAMILY,
    inputs={"L": "m", "g": "m/s^2", "theta0": "rad", "m": "kg"},
    provides={q.name: q for q in (
        Quantity("period_s", "s",
                 r"T = 4\sqrt{\frac{L}{g}}\,K\!\left(\sin\frac{\theta_0}{2}\right)", large_period),
        Quantity("max_angular_speed_rad_s", "rad/s",
                 r"\dot{\theta}_{max} = 2\sqrt{\frac{g}{L}}\sin\frac{\theta_0}{2}",
                 lambda p: 2 * math.sqrt(p["g"] / p["L"]) * math.sin(p["theta0"] / 2)),
        Quantity("max_rod_tension_N", "N", r"N_{max} = m g (3 - 2\cos\theta_0)",
                 lambda p: p["m"] * p["g"] * (3 - 2 * math.cos(p["theta0"]))),
        Quantity("min_rod_tension_N", "N", r"N_{min} = m g \cos\theta_0",
                 lambda p: p["m"] * p["g"] * math.cos(p["theta0"])),
    )},
    limits=(
        ValidityLimit("swings back and forth: 0 < theta0 < pi",
                      lambda p: 0 < p["theta0"] < math.pi),
        ValidityLimit("rod stays in tension (a string stays taut): theta0 <= pi/2",
                      lambda p: p["theta0"] <= math.pi / 2),
    ),
    source=LANDAU,
    source_note=LANDAU_NOTE,
    tolerance=1e-5,
    tolerance_reason=("exact for the rigid pendulum; extremes are read from a history sampled "
                      "at 0.5 ms, whose sampling error is below (omega dt)^2/8 ~ 1e-6, and "
                      "the integrator runs at rtol 1e-10"),
    selftest_calc=PENDULUM_LARGE_CALC,
)


def physical_omega(p) -> float:
    """sqrt(m g d / (I_G + m d^2)), rad/s."""
    return math.sqrt(p["m"] * p["g"] * p["d"] / (p["I_G"] + p["m"] * p["d"] ** 2))


PHYSICAL_PENDULUM_CALC = header(
    "physical_pendulum", "physical (compound) pendulum", MERIAM,
    [("Rigid body on a frictionless pivot a distance d from its centre of mass.",
      "The model of the handbook case."),
     ("Released from rest at 0.05 rad.", "Within the small-amplitude limit.")]) + """
[parameters]
m = "4 kg"
I_G = "0.3 kg*m^2"
d = "0.25 m"
g = "9.80665 m/s^2"
theta_0 = "0.05 rad"

[coordinates]
theta = { unit = "rad", label = "angle of the pivot-to-centre line from the downward vertical" }

[energy]
kinetic = "m/2*((d*cos(theta)*dot(theta))**2 + (d*sin(theta)*dot(theta))**2) + I_G/2*dot(theta)**2"
potential = "-m*g*d*cos(theta)"

[initial]
theta = "0.05 rad"
"dot(theta)" = "0 rad/s"

[time_history]
duration = "10 s"
points = 10001

[[crosscheck]]
case = "physical_pendulum"
inputs = { m = "m", I_G = "I_G", d = "d", g = "g", theta0 = "theta_0" }
compare = { natural_frequency_hz = "natural_frequency(1)", equivalent_length_m = "g/(2*pi*natural_frequency(1))**2" }
tolerance = 1e-8

[[crosscheck]]
case = "physical_pendulum"
inputs = { m = "m", I_G = "I_G", d = "d", g = "g", theta0 = "theta_0" }
compare = { period_s = "period(theta)" }
"""

PHYSICAL_PENDULUM = Case(
    key="physical_pendulum",
    title="Physical (compound) pendulum",
    family=FAMILY,
    inputs={"m": "kg", "I_G": "kg*m^2", "d": "m", "g": "m/s^2", "theta0": "rad"},
    provides={q.name: q for q in (
        Quantity("natural_frequency_hz", "Hz",
                 r"f_n = \frac{1}{2\pi}\sqrt{\frac{m g d}{I_G + m d^2}}",
                 lambda p: physical_omega(p) / (2 * math.pi)),
        Quantity("period_s", "s", r"T_0 = 2\pi\sqrt{\frac{I_G + m d^2}{m g d}}",
                 lambda p: 2 * math.pi / physical_omega(p)),
        Quantity("equivalent_length_m", "m", r"L_{eq} = \frac{I_G + m d^2}{m d}",
                 lambda p: (p["I_G"] + p["m"] * p["d"] ** 2) / (p["m"] * p["d"])),
    )},
    limits=(small_angle_limit(),
            ValidityLimit("pivot off the centre of mass: d > 0", lambda p: p["d"] > 0)),
    source=MERIAM,
    source_note=MERIAM_NOTE,
    tolerance=1e-3,
    tolerance_reason=("the small-angle period is short by about theta0^2/16, below 1e-3 "
                      "inside the validity limit; the linearised frequency and equivalent "
                      "length are exact and checked at 1e-8"),
    selftest_calc=PHYSICAL_PENDULUM_CALC,
)

CASES = (PENDULUM_SMALL, PENDULUM_LARGE, PHYSICAL_PENDULUM)
