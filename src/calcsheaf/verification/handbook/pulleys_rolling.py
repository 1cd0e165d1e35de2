"""Pulleys and rolling: Atwood machine with sheave inertia, rolling on an incline.

Sign conventions: in the Atwood machine mass 1 moves down when m1 > m2 and the
acceleration a is positive in that sense; rope tensions are positive in
tension.  On the incline s is measured down the slope, alpha is the slope
angle in rad and the friction force acts up the slope.
"""

from __future__ import annotations

import math

from .calctext import header
from .case import Case, Quantity, ValidityLimit

FAMILY = "pulleys and rolling"

MERIAM_ATWOOD = ('J. L. Meriam and L. G. Kraige, Engineering Mechanics: Dynamics, 7th '
                 'ed., Wiley 2012, plane kinetics of rigid bodies (fixed-axis '
                 'rotation of a pulley carrying two masses)')
MERIAM_ATWOOD_NOTE = ('Book and edition recalled (from memory); the chapter number 6 '
                      'once cited here was recalled and is not checked against a '
                      'copy, so the sheets name the topic only. The closed form '
                      'itself is tested in tests/test_handbook_mechanics.py.')
MERIAM_ROLLING = ('J. L. Meriam and L. G. Kraige, Engineering Mechanics: Dynamics, '
                  '7th ed., Wiley 2012, plane kinetics of rigid bodies (wheel rolling '
                  'without slip down an incline)')
MERIAM_ROLLING_NOTE = ('Book and edition recalled (from memory); the chapter number 6 '
                       'once cited here was recalled and is not checked against a '
                       'copy, so the sheets name the topic only. The closed form '
                       'itself is tested in tests/test_handbook_mechanics.py.')


def atwood_acceleration(p) -> float:
    """(m1 - m2) g / (m1 + m2 + I/r^2), m/s^2, positive with mass 1 descending."""
    return (p["m1"] - p["m2"]) * p["g"] / (p["m1"] + p["m2"] + p["I"] / p["r"] ** 2)


ATWOOD_CALC = header(
    "atwood_sheave", "Atwood machine with sheave inertia", MERIAM_ATWOOD,
    [("Inextensible massless rope that does not slip on the sheave; frictionless bearing.",
      "The model of the handbook case."),
     ("Each rope side is a constraint between its mass and the sheave rotation; the "
      "constraint forces are the rope tensions.", "Redundant coordinates y1, y2, phi.")]) + """
[parameters]
m_1 = "30 kg"
m_2 = "20 kg"
I_s = "0.4 kg*m^2"
r = "0.2 m"
g = "9.80665 m/s^2"

[coordinates]
y_1 = { unit = "m", label = "mass 1 position, positive down" }
y_2 = { unit = "m", label = "mass 2 position, positive down" }
phi = { unit = "rad", label = "sheave rotation, positive when mass 1 descends" }

[energy]
kinetic = "m_1/2*dot(y_1)**2 + m_2/2*dot(y_2)**2 + I_s/2*dot(phi)**2"
potential = "-m_1*g*y_1 - m_2*g*y_2"

[[constraint]]
name = "T_1"
equation = "y_1 - r*phi"
unit = "N"
label = "rope force on side 1"

[[constraint]]
name = "T_2"
equation = "y_2 + r*phi"
unit = "N"
label = "rope force on side 2"

[initial]
y_1 = "0 m"
y_2 = "0 m"
phi = "0 rad"
"dot(y_1)" = "0 m/s"
"dot(y_2)" = "0 m/s"
"dot(phi)" = "0 rad/s"

[analysis]
equilibrium = false
modes = false

[time_history]
duration = "1 s"
points = 1001

[[crosscheck]]
case = "atwood_sheave"
inputs = { m1 = "m_1", m2 = "m_2", I = "I_s", r = "r", g = "g" }
compare = { acceleration_m_s2 = "at(ddot(y_1), 0.5)", angular_acceleration_rad_s2 = "at(ddot(phi), 0.5)", tension_1_N = "abs(at(T_1, 0.5))", tension_2_N = "abs(at(T_2, 0.5))" }
"""

ATWOOD_SHEAVE = Case(
    key="atwood_sheave",
    title="Atwood machine with sheave inertia",
    family=FAMILY,
    inputs={"m1": "kg", "m2": "kg", "I": "kg*m^2", "r": "m", "g": "m/s^2"},
    provides={q.name: q for q in (
        Quantity("acceleration_m_s2", "m/s^2",
                 r"a = \frac{(m_1 - m_2) g}{m_1 + m_2 + I/r^2}", atwood_acceleration),
        Quantity("angular_acceleration_rad_s2", "rad/s^2", r"\ddot{\varphi} = \frac{a}{r}",
                 lambda p: atwood_acceleration(p) / p["r"]),
        Quantity("tension_1_N", "N", r"T_1 = m_1 (g - a)",
                 lambda p: p["m1"] * (p["g"] - atwood_acceleration(p))),
        Quantity("tension_2_N", "N", r"T_2 = m_2 (g + a)",
                 lambda p: p["m2"] * (p["g"] + atwood_acceleration(p))),
    )},
    limits=(
        ValidityLimit("positive masses and sheave radius: m1, m2, r > 0; I >= 0",
                      lambda p: min(p["m1"], p["m2"], p["r"]) > 0 and p["I"] >= 0),
        ValidityLimit("rope stays taut: T1 > 0 and T2 > 0",
                      lambda p: p["g"] - atwood_acceleration(p) > 0
                      and p["g"] + atwood_acceleration(p) > 0),
    ),
    source=MERIAM_ATWOOD,
    source_note=MERIAM_ATWOOD_NOTE,
    tolerance=1e-8,
    tolerance_reason=("exact: the motion is uniformly accelerated, so the integrator and the "
                      "constraint solve leave round-off only"),
    selftest_calc=ATWOOD_CALC,
)


def inertia_ratio(p) -> float:
    """I / (m r^2), dimensionless."""
    return p["I"] / (p["m"] * p["r"] ** 2)


def rolling_acceleration(p) -> float:
    """g sin(alpha) / (1 + I/(m r^2)), m/s^2 down the slope."""
    return p["g"] * math.sin(p["alpha"]) / (1.0 + inertia_ratio(p))


def friction_force(p) -> float:
    """Friction up the slope needed for rolling without slip, I a / r^2, N."""
    return p["I"] * rolling_acceleration(p) / p["r"] ** 2


ROLLING_CALC = header(
    "rolling_incline", "wheel rolling without slip down an incline", MERIAM_ROLLING,
    [("Rigid wheel (solid cylinder) rolling without slip; rolling resistance neglected.",
      "The model of the handbook case."),
     ("The no-slip condition s = r phi is a constraint whose force is the friction force.",
      "Redundant coordinates s, phi.")]) + """
[parameters]
m = "5 kg"
r = "0.1 m"
I_w = "0.025 kg*m^2"
alpha = "0.3 rad"
mu_s = "0.3"
g = "9.80665 m/s^2"

[coordinates]
s = { unit = "m", label = "distance of the wheel centre down the slope" }
phi = { unit = "rad", label = "wheel rotation, positive when rolling down" }

[energy]
kinetic = "m/2*dot(s)**2 + I_w/2*dot(phi)**2"
potential = "-m*g*sin(alpha)*s"

[[constraint]]
name = "F_f"
equation = "s - r*phi"
unit = "N"
label = "friction force at the contact"

[initial]
s = "0 m"
phi = "0 rad"
"dot(s)" = "0 m/s"
"dot(phi)" = "0 rad/s"

[analysis]
equilibrium = false
modes = false

[time_history]
duration = "1 s"
points = 1001

[[crosscheck]]
case = "rolling_incline"
inputs = { m = "m", r = "r", I = "I_w", alpha = "alpha", g = "g", mu_s = "mu_s" }
compare = { acceleration_m_s2 = "at(ddot(s), 0.4)", friction_force_N = "abs(at(F_f, 0.4))", required_friction_coefficient = "abs(at(F_f, 0.4))/(m*g*cos(alpha))" }
"""

ROLLING_INCLINE = Case(
    key="rolling_incline",
    title="Rolling without slip on an incline",
    family=FAMILY,
    inputs={"m": "kg", "r": "m", "I": "kg*m^2", "alpha": "rad", "g": "m/s^2", "mu_s": "1"},
    provides={q.name: q for q in (
        Quantity("acceleration_m_s2", "m/s^2",
                 r"a = \frac{g\sin\alpha}{1 + I/(m r^2)}", rolling_acceleration),
        Quantity("friction_force_N", "N", r"F = \frac{I a}{r^2}", friction_force),
        Quantity("required_friction_coefficient", "1",
                 r"\mu_{req} = \frac{F}{m g\cos\alpha} = "
                 r"\frac{\tan\alpha}{1 + m r^2/I}",
                 lambda p: friction_force(p) / (p["m"] * p["g"] * math.cos(p["alpha"]))),
    )},
    limits=(
        ValidityLimit("no slip: tan(alpha) <= mu_s (1 + m r^2 / I)",
                      lambda p: math.tan(p["alpha"]) <= p["mu_s"] * (1 + 1 / inertia_ratio(p))),
        ValidityLimit("slope between 0 and pi/2: 0 <= alpha < pi/2",
                      lambda p: 0 <= p["alpha"] < math.pi / 2),
    ),
    source=MERIAM_ROLLING,
    source_note=MERIAM_ROLLING_NOTE,
    tolerance=1e-8,
    tolerance_reason=("exact: the motion is uniformly accelerated, so the integrator and the "
                      "constraint solve leave round-off only"),
    selftest_calc=ROLLING_CALC,
)

CASES = (ATWOOD_SHEAVE, ROLLING_INCLINE)
