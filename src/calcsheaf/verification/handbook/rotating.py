"""Rotating systems: unbalance, torsional shaft, collar on a spinning arm, conical pendulum.

Sign conventions: Omega is a constant spin speed in rad/s; the unbalance force
is m_u e Omega^2 sin(Omega t) along x and the response X sin(Omega t - phi);
angles in rad; theta of the conical pendulum is measured from the downward
vertical spin axis.
"""

from __future__ import annotations

import math

from .calctext import header
from .case import Case, Quantity, ValidityLimit

FAMILY = "rotating systems"

RAO_UNBALANCE = ('S. S. Rao, Mechanical Vibrations, 6th ed., Pearson 2017, '
                 'harmonically excited vibration (forced response with rotating '
                 'unbalance)')
RAO_UNBALANCE_NOTE = ('Book and edition recalled (from memory); the section number '
                      '3.7 once cited here was recalled and is not checked against a '
                      'copy, so the sheets name the topic only. The closed form '
                      'itself is tested in tests/test_handbook_vibration.py.')
RAO_TORSION = ('S. S. Rao, Mechanical Vibrations, 6th ed., Pearson 2017, free '
               'vibration of an undamped torsional system (k_t = G I_0 / l, I_0 = pi '
               'd^4 / 32)')
RAO_TORSION_NOTE = ('Book and edition recalled (from memory); the section number 2.3 '
                    'once cited here was recalled and is not checked against a copy, '
                    'so the sheets name the topic only. The closed form itself is '
                    'tested in tests/test_handbook_vibration.py.')
MERIAM_COLLAR = ('J. L. Meriam and L. G. Kraige, Engineering Mechanics: Dynamics, 7th '
                 'ed., Wiley 2012, kinematics and kinetics of particles in polar '
                 'coordinates (collar sliding freely on a rod rotating at constant '
                 'angular speed)')
MERIAM_COLLAR_NOTE = ('Book and edition recalled (from memory); the section number '
                      '3/5 once cited here was recalled and is not checked against a '
                      'copy, so the sheets name the topic only. The closed form '
                      'itself is tested in tests/test_handbook_mechanics.py.')
MERIAM_CONICAL = ('J. L. Meriam and L. G. Kraige, Engineering Mechanics: Dynamics, '
                  '7th ed., Wiley 2012, kinetics of particles (conical pendulum, '
                  'cos(theta) = g / (Omega^2 L)); the small-oscillation frequency '
                  'omega = Omega sin(theta) is derived by linearising the relative '
                  'motion, not taken from a book')
MERIAM_CONICAL_NOTE = ('Book and edition recalled (from memory), and that it treats '
                       'the conical pendulum; no section is cited. The '
                       'small-oscillation frequency Omega sin(theta) is a derivation, '
                       'not a citation; both closed forms are tested in '
                       'tests/test_handbook_mechanics.py.')


def unbalance_dynamic_stiffness(p) -> float:
    """|k - M Omega^2 + i c Omega|, N/m."""
    w = p["Omega"]
    return math.hypot(p["k"] - p["M"] * w * w, p["c"] * w)


def unbalance_amplitude(p) -> float:
    """X = m_u e Omega^2 / |k - M Omega^2 + i c Omega|, m."""
    return p["m_u"] * p["e"] * p["Omega"] ** 2 / unbalance_dynamic_stiffness(p)


UNBALANCE_CALC = header(
    "rotating_unbalance", "machine with a rotating unbalance on a spring-damper mount",
    RAO_UNBALANCE,
    [("The machine (total mass M, including the unbalance m_u at eccentricity e) moves "
      "along x only; the rotor spins at constant Omega.", "The model of the handbook case."),
     ("The unbalance enters through its kinetic energy, not as an applied force.",
      "The general machinery derives the forcing m_u e Omega^2 sin(Omega t)."),
     ("Steady state is read after 32 revolutions, when the transient has decayed by exp(-25).",
      "c / (2 M) * 4 s = 25.")]) + """
[parameters]
M = "40 kg"
m_u = "0.5 kg"
e = "20 mm"
k = "160 kN/m"
c = "500 N*s/m"
f_r = "8 Hz"

[coordinates]
x = { unit = "mm", label = "machine displacement, positive along x" }

[energy]
kinetic = "(M - m_u)/2*dot(x)**2 + m_u/2*((e*2*pi*f_r*sin(2*pi*f_r*t))**2 + (dot(x) + e*2*pi*f_r*cos(2*pi*f_r*t))**2)"
potential = "k/2*x**2"
dissipation = "c/2*dot(x)**2"

[initial]
x = "0 m"
"dot(x)" = "0 m/s"

[analysis]
equilibrium = false
modes = false

[time_history]
duration = "4.5 s"
points = 36001

[[output]]
name = "F_tr"
expr = "k*x + c*dot(x)"
unit = "N"
label = "force transmitted to the floor"

[[crosscheck]]
case = "rotating_unbalance"
inputs = { M = "M", m_u = "m_u", e = "e", k = "k", c = "c", Omega = "2*pi*f_r" }
compare = { amplitude_m = "sqrt(at(x, 4)**2 + at(x, 4.03125)**2)", normalised_amplitude = "M*sqrt(at(x, 4)**2 + at(x, 4.03125)**2)/(m_u*e)", phase_rad = "atan2(-at(x, 4), at(x, 4.03125))", transmitted_force_N = "sqrt(at(F_tr, 4)**2 + at(F_tr, 4.03125)**2)" }
"""

ROTATING_UNBALANCE = Case(
    key="rotating_unbalance",
    title="Rotating unbalance on a damped mount",
    family=FAMILY,
    inputs={"M": "kg", "m_u": "kg", "e": "m", "k": "N/m", "c": "N*s/m", "Omega": "rad/s"},
    provides={q.name: q for q in (
        Quantity("amplitude_m", "m",
                 r"X = \frac{m_u e \Omega^2}{\sqrt{(k - M\Omega^2)^2 + (c\Omega)^2}}",
                 unbalance_amplitude),
        Quantity("normalised_amplitude", "1",
                 r"\frac{M X}{m_u e} = \frac{r^2}{\sqrt{(1 - r^2)^2 + (2\zeta r)^2}}",
                 lambda p: p["M"] * unbalance_amplitude(p) / (p["m_u"] * p["e"])),
        Quantity("phase_rad", "rad", r"\phi = \operatorname{atan2}(c\Omega,\; k - M\Omega^2)",
                 lambda p: math.atan2(p["c"] * p["Omega"], p["k"] - p["M"] * p["Omega"] ** 2)),
        Quantity("transmitted_force_N", "N",
                 r"F_T = X\sqrt{k^2 + (c\Omega)^2}",
                 lambda p: unbalance_amplitude(p) * math.hypot(p["k"], p["c"] * p["Omega"])),
    )},
    limits=(
        ValidityLimit("unbalance is part of the machine: 0 < m_u <= M",
                      lambda p: 0 < p["m_u"] <= p["M"]),
        ValidityLimit("damped, so a steady state exists: c > 0", lambda p: p["c"] > 0),
    ),
    source=RAO_UNBALANCE,
    source_note=RAO_UNBALANCE_NOTE,
    tolerance=1e-6,
    tolerance_reason=("exact steady state of the linear model; read from the time history "
                      "after the transient decayed by exp(-25), so the integrator tolerance "
                      "(rtol 1e-10) sets the error"),
    selftest_calc=UNBALANCE_CALC,
)


def shaft_stiffness(p) -> float:
    """Torsional stiffness of a solid round shaft, G pi d^4 / (32 L), N*m/rad."""
    return p["G"] * math.pi * p["d"] ** 4 / (32.0 * p["L"])


TORSION_CALC = header(
    "torsional_oscillator", "disc on a solid round shaft (torsional oscillator)", RAO_TORSION,
    [("Rigid disc on a massless, linear-elastic solid round shaft clamped at the far end.",
      "The model of the handbook case."),
     ("A steady torque T_0 is applied suddenly at t = 0 to the disc at rest.",
      "Gives a static twist and an oscillation about it.")]) + """
[parameters]
J = "0.8 kg*m^2"
G = "79.3 GPa"
d = "20 mm"
L = "0.6 m"
T_0 = "50 N*m"

[coordinates]
theta = { unit = "rad", label = "disc rotation, positive along T_0" }

[energy]
kinetic = "J/2*dot(theta)**2"
potential = "G*pi*d**4/(64*L)*theta**2 - T_0*theta"

[initial]
theta = "0 rad"
"dot(theta)" = "0 rad/s"

[time_history]
duration = "2 s"
points = 8001

[[crosscheck]]
case = "torsional_oscillator"
inputs = { J = "J", G = "G", d = "d", L = "L", T0 = "T_0" }
compare = { natural_frequency_hz = "natural_frequency(1)", static_twist_rad = "equilibrium(theta)", torsional_stiffness_N_m_per_rad = "T_0/equilibrium(theta)" }

[[crosscheck]]
case = "torsional_oscillator"
inputs = { J = "J", G = "G", d = "d", L = "L", T0 = "T_0" }
compare = { period_s = "period(theta)", max_twist_rad = "max(theta)" }
tolerance = 1e-5
"""

TORSIONAL_OSCILLATOR = Case(
    key="torsional_oscillator",
    title="Torsional oscillator: disc on a solid round shaft",
    family=FAMILY,
    inputs={"J": "kg*m^2", "G": "Pa", "d": "m", "L": "m", "T0": "N*m"},
    provides={q.name: q for q in (
        Quantity("torsional_stiffness_N_m_per_rad", "N*m/rad",
                 r"k_t = \frac{G \pi d^4}{32 L}", shaft_stiffness),
        Quantity("natural_frequency_hz", "Hz", r"f_n = \frac{1}{2\pi}\sqrt{\frac{k_t}{J}}",
                 lambda p: math.sqrt(shaft_stiffness(p) / p["J"]) / (2 * math.pi)),
        Quantity("period_s", "s", r"T = 2\pi\sqrt{\frac{J}{k_t}}",
                 lambda p: 2 * math.pi * math.sqrt(p["J"] / shaft_stiffness(p))),
        Quantity("static_twist_rad", "rad", r"\theta_{st} = \frac{T_0}{k_t}",
                 lambda p: p["T0"] / shaft_stiffness(p)),
        Quantity("max_twist_rad", "rad", r"\theta_{max} = \frac{2 T_0}{k_t}",
                 lambda p: 2 * p["T0"] / shaft_stiffness(p)),
    )},
    limits=(
        ValidityLimit("positive inertia and shaft size: J, G, d, L > 0",
                      lambda p: min(p["J"], p["G"], p["d"], p["L"]) > 0),
    ),
    source=RAO_TORSION,
    source_note=RAO_TORSION_NOTE,
    tolerance=1e-8,
    tolerance_reason=("exact for the linear model: equilibrium and eigenproblem leave "
                      "round-off only; period and peak twist come from a history sampled "
                      "at 0.25 ms, whose peak sampling error (omega dt)^2/16 is about 1e-5"),
    selftest_calc=TORSION_CALC,
)


def collar_radius(p) -> float:
    """r0 cosh(Omega t1), m (released at rest relative to the arm)."""
    return p["r0"] * math.cosh(p["Omega"] * p["t1"])


COLLAR_CALC = header(
    "collar_rotating_arm", "collar sliding freely on an arm spinning at constant speed",
    MERIAM_COLLAR,
    [("Frictionless collar (point mass) on a horizontal arm driven at constant Omega.",
      "The model of the handbook case."),
     ("The drive is a time-dependent constraint phi = Omega t; its force is the drive torque.",
      "Redundant coordinates r, phi.")]) + """
[parameters]
m = "0.5 kg"
r_0 = "0.1 m"
Omega = "3 rad/s"
t_1 = "0.5 s"
L_arm = "0.6 m"

[coordinates]
r = { unit = "m", label = "distance of the collar from the spin axis" }
phi = { unit = "rad", label = "arm angle" }

[energy]
kinetic = "m/2*(dot(r)**2 + r**2*dot(phi)**2)"

[[constraint]]
name = "M_arm"
equation = "phi - Omega*t"
unit = "N*m"
label = "drive torque on the arm"

[initial]
r = "0.1 m"
phi = "0 rad"
"dot(r)" = "0 m/s"
"dot(phi)" = "3 rad/s"

[analysis]
equilibrium = false
modes = false

[time_history]
duration = "0.6 s"
points = 1201

[[crosscheck]]
case = "collar_rotating_arm"
inputs = { m = "m", r0 = "r_0", Omega = "Omega", t1 = "t_1", L_arm = "L_arm" }
compare = { radius_m = "at(r, t_1)", radial_speed_m_s = "at(dot(r), t_1)", drive_torque_N_m = "abs(at(M_arm, t_1))", normal_force_N = "abs(at(M_arm, t_1))/at(r, t_1)" }
"""

COLLAR_ROTATING_ARM = Case(
    key="collar_rotating_arm",
    title="Collar sliding freely on an arm rotating at constant speed",
    family=FAMILY,
    inputs={"m": "kg", "r0": "m", "Omega": "rad/s", "t1": "s", "L_arm": "m"},
    provides={q.name: q for q in (
        Quantity("radius_m", "m", r"r(t_1) = r_0\cosh\Omega t_1", collar_radius),
        Quantity("radial_speed_m_s", "m/s", r"\dot{r}(t_1) = r_0\Omega\sinh\Omega t_1",
                 lambda p: p["r0"] * p["Omega"] * math.sinh(p["Omega"] * p["t1"])),
        Quantity("drive_torque_N_m", "N*m",
                 r"M = \frac{d}{dt}(m r^2\Omega) = m\Omega^2 r_0^2\sinh 2\Omega t_1",
                 lambda p: p["m"] * p["Omega"] ** 2 * p["r0"] ** 2
                 * math.sinh(2 * p["Omega"] * p["t1"])),
        Quantity("normal_force_N", "N", r"N = 2 m\Omega\dot{r} = 2 m\Omega^2 r_0\sinh\Omega t_1",
                 lambda p: 2 * p["m"] * p["Omega"] ** 2 * p["r0"]
                 * math.sinh(p["Omega"] * p["t1"])),
    )},
    limits=(
        ValidityLimit("collar still on the arm at t1: r0 cosh(Omega t1) <= L_arm",
                      lambda p: collar_radius(p) <= p["L_arm"]),
        ValidityLimit("released off the axis: r0 > 0", lambda p: p["r0"] > 0),
    ),
    source=MERIAM_COLLAR,
    source_note=MERIAM_COLLAR_NOTE,
    tolerance=1e-7,
    tolerance_reason=("exact solution of the frictionless model; the integrator runs at "
                      "rtol 1e-10 over 1.5 e-folding times and the drive torque comes from "
                      "the constraint solve"),
    selftest_calc=COLLAR_CALC,
)


def cone_angle(p) -> float:
    """acos(g / (Omega^2 L)), rad."""
    return math.acos(p["g"] / (p["Omega"] ** 2 * p["L"]))


CONICAL_CALC = header(
    "conical_pendulum", "conical pendulum (governor angle)", MERIAM_CONICAL,
    [("Point mass on a massless rod hinged to a vertical shaft spinning at constant Omega; "
      "the rod swings in the plane that turns with the shaft.", "The model of the handbook case."),
     ("Released from rest relative to the shaft at 1.0 rad, close to the conical state.",
      "The equilibrium search starts there, away from the unstable hanging state.")]) + """
[parameters]
m = "1.2 kg"
L = "0.5 m"
Omega = "6 rad/s"
g = "9.80665 m/s^2"

[coordinates]
theta = { unit = "rad", label = "rod angle from the downward spin axis" }

[energy]
kinetic = "m/2*L**2*(dot(theta)**2 + Omega**2*sin(theta)**2)"
potential = "-m*g*L*cos(theta)"

[initial]
theta = "1.0 rad"
"dot(theta)" = "0 rad/s"

[time_history]
duration = "10 s"
points = 10001

[[crosscheck]]
case = "conical_pendulum"
inputs = { L = "L", Omega = "Omega", g = "g" }
compare = { cone_angle_rad = "equilibrium(theta)", radius_m = "L*sin(equilibrium(theta))", oscillation_frequency_hz = "natural_frequency(1)" }
"""

CONICAL_PENDULUM = Case(
    key="conical_pendulum",
    title="Conical pendulum: governor angle",
    family=FAMILY,
    inputs={"L": "m", "Omega": "rad/s", "g": "m/s^2"},
    provides={q.name: q for q in (
        Quantity("cone_angle_rad", "rad", r"\cos\theta = \frac{g}{\Omega^2 L}", cone_angle),
        Quantity("radius_m", "m", r"\rho = L\sin\theta", lambda p: p["L"] * math.sin(cone_angle(p))),
        Quantity("oscillation_frequency_hz", "Hz",
                 r"f = \frac{\Omega\sin\theta}{2\pi}",
                 lambda p: p["Omega"] * math.sin(cone_angle(p)) / (2 * math.pi)),
    )},
    limits=(
        ValidityLimit("fast enough to lift the mass: Omega^2 L > g",
                      lambda p: p["Omega"] ** 2 * p["L"] > p["g"]),
    ),
    source=MERIAM_CONICAL,
    source_note=MERIAM_CONICAL_NOTE,
    tolerance=1e-8,
    tolerance_reason=("exact: the equilibrium solver and the eigenproblem of the "
                      "linearised relative motion leave round-off only"),
    selftest_calc=CONICAL_CALC,
)

CASES = (ROTATING_UNBALANCE, TORSIONAL_OSCILLATOR, COLLAR_ROTATING_ARM, CONICAL_PENDULUM)
