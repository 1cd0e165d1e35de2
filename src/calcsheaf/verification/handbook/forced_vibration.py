"""Forced vibration: harmonic force, transmissibility, base excitation, energy per cycle.

Sign convention: the excitation is F0 sin(omega t) (or base motion Y sin(omega t));
the steady response is X sin(omega t - phi), so phi in [0, pi] is the lag of the
response behind the excitation.  omega = 2 pi f_hz.
"""

from __future__ import annotations

import math

from .calctext import header
from .case import Case, Quantity, ValidityLimit

FAMILY = "forced vibration"

RAO_FORCED = ('S. S. Rao, Mechanical Vibrations, 6th ed., Pearson 2017, harmonically '
              'excited vibration (response of a damped system under a harmonic force)')
RAO_FORCED_NOTE = ('Book and edition recalled (from memory); the section number 3.4 '
                   'once cited here was recalled and is not checked against a copy, '
                   'so the sheets name the topic only. The closed form itself is '
                   'tested in tests/test_handbook_vibration.py.')
RAO_ISOLATION = ('S. S. Rao, Mechanical Vibrations, 6th ed., Pearson 2017, vibration '
                 'control (vibration isolation, force transmissibility)')
RAO_ISOLATION_NOTE = ('Book and edition recalled (from memory); the section number '
                      '9.10 once cited here was recalled and is not checked against a '
                      'copy, so the sheets name the topic only. The closed form '
                      'itself is tested in tests/test_handbook_vibration.py.')
RAO_BASE = ('S. S. Rao, Mechanical Vibrations, 6th ed., Pearson 2017, harmonically '
            'excited vibration (response of a damped system under harmonic motion of '
            'the base)')
RAO_BASE_NOTE = ('Book and edition recalled (from memory); the section number 3.6 '
                 'once cited here was recalled and is not checked against a copy, so '
                 'the sheets name the topic only. The closed form itself is tested in '
                 'tests/test_handbook_vibration.py.')
RAO_ENERGY = ('S. S. Rao, Mechanical Vibrations, 6th ed., Pearson 2017, free '
              'vibration with viscous damping (energy dissipated in viscous damping)')
RAO_ENERGY_NOTE = ('Book and edition recalled (from memory); the section number 2.6.4 '
                   'once cited here was recalled and is not checked against a copy, '
                   'so the sheets name the topic only. The closed form itself is '
                   'tested in tests/test_handbook_vibration.py.')


def omega(p) -> float:
    """Excitation circular frequency 2 pi f_hz, rad/s."""
    return 2.0 * math.pi * p["f_hz"]


def dynamic_stiffness(p) -> float:
    """|k - m omega^2 + i c omega|, N/m."""
    w = omega(p)
    return math.hypot(p["k"] - p["m"] * w * w, p["c"] * w)


def phase_lag(p) -> float:
    """Lag of the response behind the force, atan2(c omega, k - m omega^2), rad in [0, pi]."""
    w = omega(p)
    return math.atan2(p["c"] * w, p["k"] - p["m"] * w * w)


def transmissibility(p) -> float:
    """sqrt(k^2 + (c omega)^2) / |k - m omega^2 + i c omega|, dimensionless."""
    return math.hypot(p["k"], p["c"] * omega(p)) / dynamic_stiffness(p)


def frequency_ratio(p) -> float:
    """omega / omega_n, dimensionless."""
    return omega(p) / math.sqrt(p["k"] / p["m"])


SDOF_LIMITS = (
    ValidityLimit("positive mass and stiffness: m > 0, k > 0",
                  lambda p: p["m"] > 0 and p["k"] > 0),
    ValidityLimit("damped, so a steady state exists: c > 0", lambda p: p["c"] > 0),
)

# Steady state is sampled at t_a = 24 periods and t_b = t_a + a quarter period,
# where x(t_a) = -X sin(phi) and x(t_b) = X cos(phi).
SDOF_BODY = """
[parameters]
m = "12 kg"
k = "4.8 kN/m"
c = "48 N*s/m"
F_0 = "150 N"
f_e = "2.5 Hz"

[coordinates]
x = { unit = "mm", label = "displacement of the mass from equilibrium, positive along the force" }

[energy]
kinetic = "m/2*dot(x)**2"
potential = "k/2*x**2"
dissipation = "c/2*dot(x)**2"

[generalized_forces]
x = "F_0*sin(2*pi*f_e*t)"

[initial]
x = "0 m"
"dot(x)" = "0 m/s"

[time_history]
duration = "10 s"
points = 10001

[frequency_response]
force = { x = "F_0" }
from = "0.5 Hz"
to = "10 Hz"
points = 381
"""

SDOF_FORCED_CALC = header(
    "sdof_forced", "harmonically forced damped single-degree-of-freedom system", RAO_FORCED,
    [("Linear spring and viscous damper; force F_0 sin(omega t) on the mass.",
      "The model of the handbook case."),
     ("Steady state is read after 24 periods, when the transient has decayed by exp(-19).",
      "zeta omega_n t = 0.1 * 20 rad/s * 9.6 s.")]) + SDOF_BODY + """
[[crosscheck]]
case = "sdof_forced"
inputs = { m = "m", k = "k", c = "c", F0 = "F_0", f_hz = "f_e" }
compare = { amplitude_m = "frf(x, f_e)", amplitude_ratio = "k*frf(x, f_e)/F_0" }

[[crosscheck]]
case = "sdof_forced"
inputs = { m = "m", k = "k", c = "c", F0 = "F_0", f_hz = "f_e" }
compare = { amplitude_m = "sqrt(at(x, 9.6)**2 + at(x, 9.7)**2)", phase_rad = "atan2(-at(x, 9.6), at(x, 9.7))" }
tolerance = 1e-6
"""

SDOF_FORCED = Case(
    key="sdof_forced",
    title="Harmonically forced damped SDOF: amplitude and phase",
    family=FAMILY,
    inputs={"m": "kg", "k": "N/m", "c": "N*s/m", "F0": "N", "f_hz": "Hz"},
    provides={q.name: q for q in (
        Quantity("amplitude_m", "m",
                 r"X = \frac{F_0}{\sqrt{(k - m\omega^2)^2 + (c\omega)^2}}",
                 lambda p: p["F0"] / dynamic_stiffness(p)),
        Quantity("amplitude_ratio", "1",
                 r"\frac{X k}{F_0} = \frac{1}{\sqrt{(1 - r^2)^2 + (2\zeta r)^2}}",
                 lambda p: p["k"] / dynamic_stiffness(p)),
        Quantity("phase_rad", "rad",
                 r"\phi = \operatorname{atan2}(c\omega,\; k - m\omega^2)", phase_lag),
    )},
    limits=SDOF_LIMITS,
    source=RAO_FORCED,
    source_note=RAO_FORCED_NOTE,
    tolerance=1e-8,
    tolerance_reason=("exact for the linear model: the frequency response solves the "
                      "complex linear system directly; the amplitude and phase sampled "
                      "from the time history carry the decayed transient exp(-19) and "
                      "the integrator error, checked at 1e-6"),
    selftest_calc=SDOF_FORCED_CALC,
)


TRANSMISSIBILITY_FORCE_CALC = header(
    "transmissibility_force", "force transmissibility of a spring-damper mount",
    RAO_ISOLATION,
    [("Rigid machine on a linear spring and viscous damper to a rigid floor.",
      "The model of the handbook case."),
     ("The transmitted force is the spring force plus the damper force.",
      "Rigid floor.")]) + SDOF_BODY.replace('f_e = "2.5 Hz"', 'f_e = "5 Hz"') + """
[[output]]
name = "F_tr"
expr = "k*x + c*dot(x)"
unit = "N"
label = "force transmitted to the floor"

[[crosscheck]]
case = "transmissibility_force"
inputs = { m = "m", k = "k", c = "c", f_hz = "f_e" }
compare = { transmissibility = "frf(F_tr, f_e)/F_0", frequency_ratio = "f_e/natural_frequency(1)" }

[[crosscheck]]
case = "transmissibility_force"
inputs = { m = "m", k = "k", c = "c", f_hz = "f_e" }
compare = { transmissibility = "sqrt(at(F_tr, 9.6)**2 + at(F_tr, 9.65)**2)/F_0" }
tolerance = 1e-6
"""

TRANSMISSIBILITY_FORCE = Case(
    key="transmissibility_force",
    title="Force transmissibility of a damped isolator",
    family=FAMILY,
    inputs={"m": "kg", "k": "N/m", "c": "N*s/m", "f_hz": "Hz"},
    provides={q.name: q for q in (
        Quantity("transmissibility", "1",
                 r"T_F = \frac{F_T}{F_0} = \sqrt{\frac{k^2 + (c\omega)^2}"
                 r"{(k - m\omega^2)^2 + (c\omega)^2}}", transmissibility),
        Quantity("frequency_ratio", "1", r"r = \frac{\omega}{\sqrt{k/m}}", frequency_ratio),
    )},
    limits=SDOF_LIMITS,
    source=RAO_ISOLATION,
    source_note=RAO_ISOLATION_NOTE,
    tolerance=1e-8,
    tolerance_reason=("exact for the linear model (frequency response of an output linear in "
                      "x and dot(x)); the sampled steady state is checked at 1e-6"),
    selftest_calc=TRANSMISSIBILITY_FORCE_CALC,
)


TRANSMISSIBILITY_BASE_CALC = header(
    "transmissibility_base", "displacement transmissibility under harmonic base motion",
    RAO_BASE,
    [("Rigid mass on a linear spring and viscous damper whose far ends move as Y sin(omega t).",
      "The model of the handbook case."),
     ("Steady state is read after 48 periods, when the transient has decayed by exp(-19).",
      "zeta omega_n t = 0.1 * 20 rad/s * 9.6 s.")]) + """
[parameters]
m = "12 kg"
k = "4.8 kN/m"
c = "48 N*s/m"
Y = "1.5 mm"
f_e = "5 Hz"

[coordinates]
x = { unit = "mm", label = "absolute displacement of the mass, positive along the base motion" }

[energy]
kinetic = "m/2*dot(x)**2"
potential = "k/2*(x - Y*sin(2*pi*f_e*t))**2"
dissipation = "c/2*(dot(x) - 2*pi*f_e*Y*cos(2*pi*f_e*t))**2"

[initial]
x = "0 m"
"dot(x)" = "0 m/s"

[analysis]
equilibrium = false
modes = false

[time_history]
duration = "10 s"
points = 10001

[[output]]
name = "z_rel"
expr = "x - Y*sin(2*pi*f_e*t)"
unit = "mm"
label = "displacement of the mass relative to the base"

[[crosscheck]]
case = "transmissibility_base"
inputs = { m = "m", k = "k", c = "c", f_hz = "f_e" }
compare = { displacement_transmissibility = "sqrt(at(x, 9.6)**2 + at(x, 9.65)**2)/Y", relative_transmissibility = "sqrt(at(z_rel, 9.6)**2 + at(z_rel, 9.65)**2)/Y" }
"""

TRANSMISSIBILITY_BASE = Case(
    key="transmissibility_base",
    title="Displacement transmissibility under harmonic base excitation",
    family=FAMILY,
    inputs={"m": "kg", "k": "N/m", "c": "N*s/m", "f_hz": "Hz"},
    provides={q.name: q for q in (
        Quantity("displacement_transmissibility", "1",
                 r"\frac{X}{Y} = \sqrt{\frac{k^2 + (c\omega)^2}"
                 r"{(k - m\omega^2)^2 + (c\omega)^2}}", transmissibility),
        Quantity("relative_transmissibility", "1",
                 r"\frac{Z}{Y} = \frac{m\omega^2}{\sqrt{(k - m\omega^2)^2 + (c\omega)^2}}",
                 lambda p: p["m"] * omega(p) ** 2 / dynamic_stiffness(p)),
    )},
    limits=SDOF_LIMITS,
    source=RAO_BASE,
    source_note=RAO_BASE_NOTE,
    tolerance=1e-6,
    tolerance_reason=("exact steady state of the linear model; read from the time history "
                      "after the transient decayed by exp(-19), so the integrator tolerance "
                      "(rtol 1e-10) and sampling set the error"),
    selftest_calc=TRANSMISSIBILITY_BASE_CALC,
)


ENERGY_PER_CYCLE_CALC = header(
    "energy_per_cycle", "energy dissipated per cycle by a viscous damper", RAO_ENERGY,
    [("The mass is driven so that it moves exactly as X_0 sin(omega t) from t = 0.",
      "Driving force (k - m omega^2) X_0 sin(omega t) + c omega X_0 cos(omega t), with "
      "dot(x)(0) = omega X_0, has that motion as its exact solution."),
     ("The record spans an integer number of cycles (10).",
      "duration 4 s at 2.5 Hz.")]) + """
[parameters]
m = "12 kg"
k = "4.8 kN/m"
c = "48 N*s/m"
X_0 = "2 mm"
f_e = "2.5 Hz"

[coordinates]
x = { unit = "mm", label = "displacement of the mass, positive along the drive" }

[energy]
kinetic = "m/2*dot(x)**2"
potential = "k/2*x**2"
dissipation = "c/2*dot(x)**2"

[generalized_forces]
x = "(k - m*(2*pi*f_e)**2)*X_0*sin(2*pi*f_e*t) + c*2*pi*f_e*X_0*cos(2*pi*f_e*t)"

[initial]
x = "0 m"
"dot(x)" = "0.0314159265358979 m/s"

[time_history]
duration = "4 s"
points = 8001

[[output]]
name = "P_d"
expr = "c*dot(x)**2"
unit = "W"
label = "power dissipated in the damper"

[[crosscheck]]
case = "energy_per_cycle"
inputs = { c = "c", X = "X_0", f_hz = "f_e" }
compare = { energy_per_cycle_J = "mean(P_d)/f_e", mean_power_W = "mean(P_d)" }
"""

ENERGY_PER_CYCLE = Case(
    key="energy_per_cycle",
    title="Energy dissipated per cycle of harmonic motion by a viscous damper",
    family=FAMILY,
    inputs={"c": "N*s/m", "X": "m", "f_hz": "Hz"},
    provides={q.name: q for q in (
        Quantity("energy_per_cycle_J", "J", r"W_d = \pi c \omega X^2",
                 lambda p: math.pi * p["c"] * omega(p) * p["X"] ** 2),
        Quantity("mean_power_W", "W", r"\bar{P} = \tfrac{1}{2} c \omega^2 X^2",
                 lambda p: 0.5 * p["c"] * omega(p) ** 2 * p["X"] ** 2),
    )},
    limits=(
        ValidityLimit("harmonic motion of amplitude X > 0", lambda p: p["X"] > 0),
        ValidityLimit("viscous damper: c >= 0", lambda p: p["c"] >= 0),
    ),
    source=RAO_ENERGY,
    source_note=RAO_ENERGY_NOTE,
    tolerance=1e-6,
    tolerance_reason=("exact for harmonic motion; the time mean over a whole number of "
                      "cycles of the sampled history carries the integrator error "
                      "(rtol 1e-10) and the quadrature of the mean"),
    selftest_calc=ENERGY_PER_CYCLE_CALC,
)

CASES = (SDOF_FORCED, TRANSMISSIBILITY_FORCE, TRANSMISSIBILITY_BASE, ENERGY_PER_CYCLE)
