"""Multi-degree-of-freedom: two-mass chain modes and the Den Hartog tuned-mass absorber.

Sign convention: x1, x2 are displacements of the masses from equilibrium along
the chain; frequencies in Hz; the absorber damping ratio follows Den Hartog,
c_a / (2 m_a Omega_n) with Omega_n = sqrt(k / M) of the main system.
"""

from __future__ import annotations

import math

from .calctext import header, number
from .case import Case, Quantity, ValidityLimit

FAMILY = "multi-degree-of-freedom"

RAO_TWO = ('S. S. Rao, Mechanical Vibrations, 6th ed., Pearson 2017, '
           'two-degree-of-freedom systems (free vibration analysis of an undamped '
           'system)')
RAO_TWO_NOTE = ('Book and edition recalled (from memory); the section number 5.3 once '
                'cited here was recalled and is not checked against a copy, so the '
                'sheets name the topic only. The closed form itself is tested in '
                'tests/test_handbook_vibration.py.')
DEN_HARTOG = ('J. P. Den Hartog, Mechanical Vibrations, 4th ed., McGraw-Hill 1956 '
              '(Dover reprint 1985), the damped vibration absorber (optimum tuning f '
              '= 1/(1 + mu), optimum damping (c/c_c)^2 = 3 mu / (8 (1 + mu)^3), '
              'fixed-point height x/x_st = sqrt(1 + 2/mu))')
DEN_HARTOG_NOTE = ('Book, edition and the three optimum formulas recalled (from '
                   'memory); section 3.3, once cited here, was recalled and is not '
                   'checked against a copy. The formulas are tested against numerical '
                   'frequency responses in tests/test_handbook_vibration.py.')


def chain_omegas_squared(p) -> tuple[float, float]:
    """Both roots of det(K - w^2 M) = 0 for wall-k1-m1-k2-m2-k3-wall, (rad/s)^2, ascending."""
    a = (p["k1"] + p["k2"]) / p["m1"]
    b = (p["k2"] + p["k3"]) / p["m2"]
    root = math.sqrt((a - b) ** 2 + 4 * p["k2"] ** 2 / (p["m1"] * p["m2"]))
    return (a + b - root) / 2, (a + b + root) / 2


def chain_frequency_hz(index: int):
    def compute(p) -> float:
        return math.sqrt(chain_omegas_squared(p)[index]) / (2 * math.pi)
    return compute


CHAIN_FORMULA = (r"\omega^2 = \frac{a + b \mp \sqrt{(a - b)^2 + 4k_2^2/(m_1 m_2)}}{2},\;"
                 r"a = \frac{k_1 + k_2}{m_1},\; b = \frac{k_2 + k_3}{m_2}")

CHAIN_CALC = header(
    "two_mass_chain", "two masses and three springs between fixed walls", RAO_TWO,
    [("Two rigid masses on a line, joined to each other and to rigid walls by linear springs.",
      "The model of the handbook case."),
     ("Undamped.", "The handbook case.")]) + """
[parameters]
m_1 = "10 kg"
m_2 = "5 kg"
k_1 = "2 kN/m"
k_2 = "1 kN/m"
k_3 = "0.5 kN/m"

[coordinates]
x_1 = { unit = "mm", label = "displacement of mass 1 from equilibrium" }
x_2 = { unit = "mm", label = "displacement of mass 2 from equilibrium" }

[energy]
kinetic = "m_1/2*dot(x_1)**2 + m_2/2*dot(x_2)**2"
potential = "k_1/2*x_1**2 + k_2/2*(x_2 - x_1)**2 + k_3/2*x_2**2"

[initial]
x_1 = "10 mm"
x_2 = "0 mm"
"dot(x_1)" = "0 m/s"
"dot(x_2)" = "0 m/s"

[time_history]
duration = "5 s"
points = 5001

[[crosscheck]]
case = "two_mass_chain"
inputs = { m1 = "m_1", m2 = "m_2", k1 = "k_1", k2 = "k_2", k3 = "k_3" }
compare = { mode_1_frequency_hz = "natural_frequency(1)", mode_2_frequency_hz = "natural_frequency(2)" }
"""

TWO_MASS_CHAIN = Case(
    key="two_mass_chain",
    title="Two-mass, three-spring chain: natural frequencies",
    family=FAMILY,
    inputs={"m1": "kg", "m2": "kg", "k1": "N/m", "k2": "N/m", "k3": "N/m"},
    provides={q.name: q for q in (
        Quantity("mode_1_frequency_hz", "Hz", r"f_1 = \frac{\omega_1}{2\pi},\;" + CHAIN_FORMULA,
                 chain_frequency_hz(0)),
        Quantity("mode_2_frequency_hz", "Hz", r"f_2 = \frac{\omega_2}{2\pi},\;" + CHAIN_FORMULA,
                 chain_frequency_hz(1)),
    )},
    limits=(
        ValidityLimit("positive masses: m1, m2 > 0", lambda p: min(p["m1"], p["m2"]) > 0),
        ValidityLimit("coupled and held: k2 > 0 and k1 + k3 > 0",
                      lambda p: p["k2"] > 0 and p["k1"] + p["k3"] > 0),
    ),
    source=RAO_TWO,
    source_note=RAO_TWO_NOTE,
    tolerance=1e-8,
    tolerance_reason="exact: both come from the 2x2 eigenproblem, round-off only",
    selftest_calc=CHAIN_CALC,
)


def mass_ratio(p) -> float:
    """mu = m_a / M, dimensionless."""
    return p["m_a"] / p["M"]


def main_omega(p) -> float:
    """Omega_n = sqrt(k / M) of the main system, rad/s."""
    return math.sqrt(p["k"] / p["M"])


def optimum_tuning(p) -> float:
    """Den Hartog optimum tuning f = omega_a / Omega_n = 1 / (1 + mu)."""
    return 1.0 / (1.0 + mass_ratio(p))


def optimum_damping(p) -> float:
    """Den Hartog optimum damping c_a / (2 m_a Omega_n) = sqrt(3 mu / (8 (1 + mu)^3))."""
    mu = mass_ratio(p)
    return math.sqrt(3 * mu / (8 * (1 + mu) ** 3))


def fixed_point_frequency_hz(p, sign: int) -> float:
    """Fixed points of the optimally tuned absorber: g^2 = (1 -/+ sqrt(mu/(2+mu)))/(1+mu)."""
    mu = mass_ratio(p)
    g2 = (1 + sign * math.sqrt(mu / (2 + mu))) / (1 + mu)
    return math.sqrt(g2) * main_omega(p) / (2 * math.pi)


def fixed_point_height(p) -> float:
    """x / x_st at both fixed points, sqrt(1 + 2/mu)."""
    return math.sqrt(1 + 2 / mass_ratio(p))


def absorber_calc() -> str:
    """Self-test calc with the absorber set to the optimum of this case's own formulas."""
    p = {"M": 100.0, "k": 1.0e5, "m_a": 5.0}
    k_a = p["m_a"] * (optimum_tuning(p) * main_omega(p)) ** 2
    c_a = 2 * p["m_a"] * main_omega(p) * optimum_damping(p)
    f_p, f_q = fixed_point_frequency_hz(p, -1), fixed_point_frequency_hz(p, +1)
    return header(
        "tuned_mass_absorber", "Den Hartog optimum damped vibration absorber", DEN_HARTOG,
        [("Undamped main mass on a linear spring with a viscously damped absorber mass.",
          "The model of the handbook case."),
         ("Absorber stiffness and damping set to the optimum of the case (15 digits).",
          "Checks the response of the optimally tuned absorber.")]) + f"""
[parameters]
M = "100 kg"
k = "100 kN/m"
m_a = "5 kg"
k_a = "{number(k_a)} N/m"
c_a = "{number(c_a)} N*s/m"
f_P = "{number(f_p)} Hz"
f_Q = "{number(f_q)} Hz"
F_0 = "100 N"

[coordinates]
x_1 = {{ unit = "mm", label = "main mass displacement from equilibrium" }}
x_2 = {{ unit = "mm", label = "absorber mass displacement from equilibrium" }}

[energy]
kinetic = "M/2*dot(x_1)**2 + m_a/2*dot(x_2)**2"
potential = "k/2*x_1**2 + k_a/2*(x_2 - x_1)**2"
dissipation = "c_a/2*(dot(x_2) - dot(x_1))**2"

[initial]
x_1 = "0 m"
x_2 = "0 m"
"dot(x_1)" = "0 m/s"
"dot(x_2)" = "0 m/s"

[frequency_response]
force = {{ x_1 = "F_0" }}
from = "3 Hz"
to = "7 Hz"
points = 2001

[[crosscheck]]
case = "tuned_mass_absorber"
inputs = {{ M = "M", k = "k", m_a = "m_a" }}
compare = {{ fixed_point_amplification = "k*frf(x_1, f_P)/F_0" }}

[[crosscheck]]
case = "tuned_mass_absorber"
inputs = {{ M = "M", k = "k", m_a = "m_a" }}
compare = {{ fixed_point_amplification = "k*frf(x_1, f_Q)/F_0" }}

[[crosscheck]]
case = "tuned_mass_absorber"
inputs = {{ M = "M", k = "k", m_a = "m_a" }}
compare = {{ peak_amplification = "k*frf_peak(x_1)/F_0" }}
tolerance = 5e-3
"""


TUNED_MASS_ABSORBER = Case(
    key="tuned_mass_absorber",
    title="Tuned-mass absorber: Den Hartog optimum tuning and damping",
    family=FAMILY,
    inputs={"M": "kg", "k": "N/m", "m_a": "kg"},
    provides={q.name: q for q in (
        Quantity("optimum_frequency_ratio", "1",
                 r"f_{opt} = \frac{\omega_a}{\Omega_n} = \frac{1}{1 + \mu},\; \mu = \frac{m_a}{M}",
                 optimum_tuning, design=True),
        Quantity("optimum_damping_ratio", "1",
                 r"\zeta_{opt} = \frac{c_a}{2 m_a \Omega_n} = \sqrt{\frac{3\mu}{8(1 + \mu)^3}}",
                 optimum_damping, design=True),
        Quantity("absorber_stiffness_N_m", "N/m", r"k_a = m_a (f_{opt}\Omega_n)^2",
                 lambda p: p["m_a"] * (optimum_tuning(p) * main_omega(p)) ** 2, design=True),
        Quantity("absorber_damping_N_s_m", "N*s/m", r"c_a = 2 m_a \Omega_n \zeta_{opt}",
                 lambda p: 2 * p["m_a"] * main_omega(p) * optimum_damping(p), design=True),
        Quantity("fixed_point_amplification", "1",
                 r"\frac{x_1}{x_{st}}\Big|_{P,Q} = \sqrt{1 + \frac{2}{\mu}}", fixed_point_height),
        Quantity("peak_amplification", "1",
                 r"\frac{x_{1,max}}{x_{st}} \approx \sqrt{1 + \frac{2}{\mu}}", fixed_point_height),
    )},
    limits=(
        ValidityLimit("main system undamped (the optimum assumes it); absorber mass ratio "
                      "0 < mu <= 0.25 for the peak estimate",
                      lambda p: 0 < mass_ratio(p) <= 0.25),
    ),
    source=DEN_HARTOG,
    source_note=DEN_HARTOG_NOTE,
    tolerance=1e-8,
    tolerance_reason=("tuning and damping rules and the fixed-point height are exact for the "
                      "model (round-off only); the true peak exceeds the fixed-point height "
                      "slightly because the optimum makes the curve flat at the fixed points "
                      "only approximately: measured 0.08 % at mu = 0.05 and 0.41 % at "
                      "mu = 0.25, so the peak is checked at 5e-3"),
    selftest_calc=absorber_calc(),
)

CASES = (TWO_MASS_CHAIN, TUNED_MASS_ABSORBER)
