"""Free vibration: viscously damped SDOF and the static-deflection frequency.

Sign convention: x is the displacement of the mass from its static
equilibrium, positive along the spring axis; frequencies in Hz, angles in rad.
"""

from __future__ import annotations

import math

from .calctext import header
from .case import Case, Quantity, ValidityLimit

FAMILY = "free vibration"

RAO = ('S. S. Rao, Mechanical Vibrations, 6th ed., Pearson 2017, free vibration of '
       'single-degree-of-freedom systems with viscous damping')
RAO_NOTE = ('Book and edition recalled (from memory); the section number 2.6 once '
            'cited here was recalled and is not checked against a copy, so the sheets '
            'name the topic only. The closed form itself is tested in '
            'tests/test_handbook_vibration.py.')
RAO_STATIC = ('S. S. Rao, Mechanical Vibrations, 6th ed., Pearson 2017, free '
              'vibration of an undamped single-degree-of-freedom system (natural '
              'frequency from the static deflection)')
RAO_STATIC_NOTE = ('Book and edition recalled (from memory); the section number 2.2 '
                   'once cited here was recalled and is not checked against a copy, '
                   'so the sheets name the topic only. The closed form itself is '
                   'tested in tests/test_handbook_vibration.py.')


def omega_n(p) -> float:
    """Undamped natural circular frequency sqrt(k/m), rad/s."""
    return math.sqrt(p["k"] / p["m"])


def zeta(p) -> float:
    """Damping ratio c / (2 sqrt(k m)), dimensionless."""
    return p["c"] / (2.0 * math.sqrt(p["k"] * p["m"]))


def omega_d(p) -> float:
    """Damped circular frequency omega_n sqrt(1 - zeta^2), rad/s (underdamped)."""
    return omega_n(p) * math.sqrt(1.0 - zeta(p) ** 2)


def log_decrement(p) -> float:
    """Logarithmic decrement 2 pi zeta / sqrt(1 - zeta^2), dimensionless."""
    z = zeta(p)
    return 2.0 * math.pi * z / math.sqrt(1.0 - z * z)


def free_displacement(p) -> float:
    """x(t1) of the underdamped free response from x(0) = x0, dot(x)(0) = v0, m."""
    wn, z, wd, t = omega_n(p), zeta(p), omega_d(p), p["t1"]
    envelope = math.exp(-z * wn * t)
    return envelope * (p["x0"] * math.cos(wd * t)
                       + (p["v0"] + z * wn * p["x0"]) / wd * math.sin(wd * t))


def free_velocity(p) -> float:
    """dot(x)(t1) of the underdamped free response, m/s (derivative of free_displacement)."""
    wn, z, wd, t = omega_n(p), zeta(p), omega_d(p), p["t1"]
    envelope = math.exp(-z * wn * t)
    return envelope * (p["v0"] * math.cos(wd * t)
                       - (wn * p["x0"] + z * p["v0"]) * wn / wd * math.sin(wd * t))


SDOF_VISCOUS_CALC = header(
    "sdof_viscous", "viscously damped single-degree-of-freedom free vibration", RAO,
    [("Rigid mass on a linear spring and a linear viscous damper, moving along one line.",
      "The model of the handbook case."),
     ("Gravity is omitted: it shifts the equilibrium only and does not change the motion about it.",
      "Linear spring.")]) + """
[parameters]
m = "12 kg"
k = "4.8 kN/m"
c = "24 N*s/m"

[coordinates]
x = { unit = "mm", label = "displacement of the mass, positive along the spring axis" }

[energy]
kinetic = "m/2*dot(x)**2"
potential = "k/2*x**2"
dissipation = "c/2*dot(x)**2"

[initial]
x = "5 mm"
"dot(x)" = "0.1 m/s"

[time_history]
duration = "4 s"
points = 8001

[[result]]
name = "f_n"
expr = "natural_frequency(1)"
unit = "Hz"
label = "undamped natural frequency"

[[crosscheck]]
case = "sdof_viscous"
inputs = { m = "m", k = "k", c = "c" }
compare = { natural_frequency_hz = "natural_frequency(1)", damping_ratio = "damping_ratio(1)", damped_frequency_hz = "damped_frequency(1)" }

[[crosscheck]]
case = "sdof_viscous"
inputs = { m = "m", k = "k", c = "c" }
compare = { log_decrement = "log_decrement(x)", damped_period_s = "period(x)" }
tolerance = 1e-6
"""

SDOF_VISCOUS = Case(
    key="sdof_viscous",
    title="Viscously damped single-degree-of-freedom free vibration",
    family=FAMILY,
    inputs={"m": "kg", "k": "N/m", "c": "N*s/m"},
    provides={q.name: q for q in (
        Quantity("natural_frequency_hz", "Hz", r"f_n = \frac{1}{2\pi}\sqrt{\frac{k}{m}}",
                 lambda p: omega_n(p) / (2 * math.pi)),
        Quantity("damping_ratio", "1", r"\zeta = \frac{c}{2\sqrt{k m}}", zeta),
        Quantity("damped_frequency_hz", "Hz", r"f_d = f_n \sqrt{1 - \zeta^2}",
                 lambda p: omega_d(p) / (2 * math.pi)),
        Quantity("log_decrement", "1", r"\delta = \frac{2\pi\zeta}{\sqrt{1-\zeta^2}}",
                 log_decrement),
        Quantity("damped_period_s", "s", r"T_d = \frac{1}{f_d}",
                 lambda p: 2 * math.pi / omega_d(p)),
    )},
    limits=(
        ValidityLimit("positive mass and stiffness: m > 0, k > 0",
                      lambda p: p["m"] > 0 and p["k"] > 0),
        ValidityLimit("underdamped: 0 <= zeta < 1", lambda p: 0 <= zeta(p) < 1),
    ),
    source=RAO,
    source_note=RAO_NOTE,
    tolerance=1e-8,
    tolerance_reason=("exact for the linear model: modes come from the eigenproblem "
                      "(round-off only); period and decrement of the free response, taken "
                      "from the integrated history (rtol 1e-10), are checked at 1e-6"),
    selftest_calc=SDOF_VISCOUS_CALC,
)


FREE_RESPONSE_CALC = header(
    "sdof_free_response", "free response of a viscously damped SDOF from given initial conditions",
    RAO,
    [("Rigid mass on a linear spring and a linear viscous damper, moving along one line.",
      "The model of the handbook case."),
     ("Released at t = 0 from x_0 with velocity v_0.", "Underdamped: zeta = 0.05.")]) + """
[parameters]
m = "12 kg"
k = "4.8 kN/m"
c = "24 N*s/m"
x_0 = "5 mm"
v_0 = "0.1 m/s"
t_1 = "0.37 s"

[coordinates]
x = { unit = "mm", label = "displacement of the mass, positive along the spring axis" }

[energy]
kinetic = "m/2*dot(x)**2"
potential = "k/2*x**2"
dissipation = "c/2*dot(x)**2"

[initial]
x = "5 mm"
"dot(x)" = "0.1 m/s"

[time_history]
duration = "1 s"
points = 2001

[[crosscheck]]
case = "sdof_free_response"
inputs = { m = "m", k = "k", c = "c", x0 = "x_0", v0 = "v_0", t1 = "t_1" }
compare = { displacement_m = "at(x, t_1)", velocity_m_s = "at(dot(x), t_1)" }
"""

SDOF_FREE_RESPONSE = Case(
    key="sdof_free_response",
    title="Free response of a viscously damped SDOF",
    family=FAMILY,
    inputs={"m": "kg", "k": "N/m", "c": "N*s/m", "x0": "m", "v0": "m/s", "t1": "s"},
    provides={q.name: q for q in (
        Quantity("displacement_m", "m",
                 r"x(t_1) = e^{-\zeta\omega_n t_1}\left(x_0\cos\omega_d t_1 + "
                 r"\frac{v_0 + \zeta\omega_n x_0}{\omega_d}\sin\omega_d t_1\right)",
                 free_displacement),
        Quantity("velocity_m_s", "m/s",
                 r"\dot{x}(t_1) = e^{-\zeta\omega_n t_1}\left(v_0\cos\omega_d t_1 - "
                 r"\frac{\omega_n (\omega_n x_0 + \zeta v_0)}{\omega_d}\sin\omega_d t_1\right)",
                 free_velocity),
    )},
    limits=(
        ValidityLimit("positive mass and stiffness: m > 0, k > 0",
                      lambda p: p["m"] > 0 and p["k"] > 0),
        ValidityLimit("underdamped: 0 <= zeta < 1", lambda p: 0 <= zeta(p) < 1),
        ValidityLimit("after the release: t1 >= 0", lambda p: p["t1"] >= 0),
    ),
    source=RAO,
    source_note=RAO_NOTE,
    tolerance=1e-8,
    tolerance_reason=("exact solution of the linear model; the integrator runs at rtol 1e-10 "
                      "and t1 falls on a sample of the history"),
    selftest_calc=FREE_RESPONSE_CALC,
)


STATIC_DEFLECTION_CALC = header(
    "static_deflection", "natural frequency from the static deflection", RAO_STATIC,
    [("Rigid mass hanging on a linear spring under gravity.", "The model of the handbook case."),
     ("The spring is massless and undamped.", "The handbook case.")]) + """
[parameters]
m = "250 kg"
k = "98.0665 kN/m"
g = "9.80665 m/s^2"

[coordinates]
z = { unit = "mm", label = "height of the mass above the unstretched-spring position, positive up" }

[energy]
kinetic = "m/2*dot(z)**2"
potential = "k/2*z**2 + m*g*z"

[initial]
z = "-20 mm"
"dot(z)" = "0 m/s"

[time_history]
duration = "2 s"
points = 4001

[[result]]
name = "z_eq"
expr = "equilibrium(z)"
unit = "mm"
label = "static equilibrium position"

[[crosscheck]]
case = "static_deflection"
inputs = { g = "g", delta = "-equilibrium(z)" }
compare = { natural_frequency_hz = "natural_frequency(1)" }

[[crosscheck]]
case = "static_deflection"
inputs = { g = "g", delta = "m*g/k" }
compare = { natural_frequency_hz = "natural_frequency(1)", period_s = "period(z)" }
tolerance = 1e-6
"""

STATIC_DEFLECTION = Case(
    key="static_deflection",
    title="Natural frequency from the static deflection",
    family=FAMILY,
    inputs={"g": "m/s^2", "delta": "m"},
    provides={q.name: q for q in (
        Quantity("natural_frequency_hz", "Hz", r"f_n = \frac{1}{2\pi}\sqrt{\frac{g}{\delta}}",
                 lambda p: math.sqrt(p["g"] / p["delta"]) / (2 * math.pi)),
        Quantity("period_s", "s", r"T = 2\pi\sqrt{\frac{\delta}{g}}",
                 lambda p: 2 * math.pi * math.sqrt(p["delta"] / p["g"])),
    )},
    limits=(
        ValidityLimit("spring compressed or stretched by the weight: delta > 0",
                      lambda p: p["delta"] > 0),
        ValidityLimit("gravity acts: g > 0", lambda p: p["g"] > 0),
    ),
    source=RAO_STATIC,
    source_note=RAO_STATIC_NOTE,
    tolerance=1e-8,
    tolerance_reason=("exact for a linear spring (delta = m g / k); the equilibrium solver "
                      "and the eigenproblem leave round-off only; the period from the "
                      "sampled history is checked at 1e-6"),
    selftest_calc=STATIC_DEFLECTION_CALC,
)

CASES = (SDOF_VISCOUS, SDOF_FREE_RESPONSE, STATIC_DEFLECTION)
