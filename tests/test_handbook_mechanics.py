"""Closed forms of pendulums, pulleys and rolling, and rotating systems, checked independently.

Independent references: scipy.special.ellipk and scipy quadrature of the period
integral, scipy solve_ivp of Newton's equations, sympy.physics.mechanics
(Lagrange's and Kane's methods), and published values named beside each check.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import sympy as sp
from scipy.integrate import quad, solve_ivp
from scipy.special import ellipk
from sympy.physics import mechanics as me

from calcsheaf.verification.handbook import get_case

G = 9.80665


def integrate(rhs, y0, t_end, events=None):
    sol = solve_ivp(rhs, (0.0, t_end), y0, method="DOP853", rtol=1e-12, atol=1e-13,
                    dense_output=True, events=events)
    assert sol.success
    return sol


def pendulum_rhs(g_over_l):
    return lambda t, y: [y[1], -g_over_l * math.sin(y[0])]


# ---- pendulums ------------------------------------------------------------------

def test_large_period_equals_quadrature_of_the_energy_integral():
    case = get_case("pendulum_large")
    L, theta0 = 1.5, 1.2
    # T = 4 sqrt(L/(2g)) * integral_0^theta0 dtheta / sqrt(cos theta - cos theta0),
    # integrable endpoint singularity handled by quad's algebraic weight after substitution
    # theta = theta0 sin(u): dtheta = theta0 cos(u) du
    integrand = lambda u: theta0 * math.cos(u) / math.sqrt(
        max(math.cos(theta0 * math.sin(u)) - math.cos(theta0), 1e-300))
    value, _ = quad(integrand, 0.0, math.pi / 2, limit=200, epsabs=0, epsrel=1e-13)
    period = 4 * math.sqrt(L / (2 * G)) * value
    values = case.evaluate({"L": L, "g": G, "theta0": theta0, "m": 3.0})
    assert values["period_s"] == pytest.approx(period, rel=1e-10)


def test_large_period_uses_the_parameter_convention_of_ellipk():
    # Abramowitz and Stegun, Handbook of Mathematical Functions, Table 17.1:
    # K(m = 1/2) = 1.8540746773 (from memory); theta0 = 90 deg gives k^2 = sin^2(45 deg) = 1/2
    assert ellipk(0.5) == pytest.approx(1.8540746773, rel=1e-10)
    values = get_case("pendulum_large").evaluate(
        {"L": 1.0, "g": G, "theta0": math.pi / 2, "m": 1.0})
    assert values["period_s"] == pytest.approx(4 * math.sqrt(1 / G) * 1.8540746773, rel=1e-10)


@pytest.mark.parametrize("degrees, ratio", [(30, 1.01741), (60, 1.07318), (90, 1.18034),
                                            (150, 1.76220)])
def test_large_period_ratio_table(degrees, ratio):
    # ratio T/T0 of the large- to small-amplitude period: the table of T/T0 in
    # S. T. Thornton and J. B. Marion, Classical Dynamics, 5th ed., section 4.4 (from memory)
    theta0 = math.radians(degrees)
    p = {"L": 1.0, "g": G, "theta0": theta0, "m": 1.0}
    large = get_case("pendulum_large").evaluate(p)["period_s"]
    small = get_case("pendulum_small").evaluate({"L": 1.0, "g": G, "theta0": theta0})["period_s"]
    assert large / small == pytest.approx(ratio, abs=1e-5)


def test_large_pendulum_speed_tension_and_period_match_solve_ivp():
    L, m, theta0 = 1.5, 3.0, 1.2
    values = get_case("pendulum_large").evaluate({"L": L, "g": G, "theta0": theta0, "m": m})
    upward = lambda t, y: y[0]
    upward.direction = 1
    sol = integrate(pendulum_rhs(G / L), [theta0, 0.0], 6.0, events=upward)
    crossings = sol.t_events[0]
    assert crossings[1] - crossings[0] == pytest.approx(values["period_s"], rel=1e-9)
    speed = abs(sol.sol(crossings[0])[1])              # at the bottom
    assert values["max_angular_speed_rad_s"] == pytest.approx(speed, rel=1e-9)
    # rod tension from Newton along the rod: N = m (L thetadot^2 + g cos theta)
    assert values["max_rod_tension_N"] == pytest.approx(m * (L * speed ** 2 + G), rel=1e-9)
    assert values["min_rod_tension_N"] == pytest.approx(m * G * math.cos(theta0), rel=1e-12)


def test_small_pendulum_period_error_is_theta0_squared_over_16():
    # T / T0 ~ 1 + theta0^2 / 16 (series of K; Abramowitz and Stegun 17.3.11, from memory)
    theta0 = 0.1
    p = {"L": 0.8, "g": G, "theta0": theta0}
    small = get_case("pendulum_small").evaluate(p)["period_s"]
    large = get_case("pendulum_large").evaluate({**p, "m": 1.0})["period_s"]
    assert large / small - 1 == pytest.approx(theta0 ** 2 / 16, rel=2e-3)
    assert get_case("pendulum_small").tolerance >= theta0 ** 2 / 16


def physical_pendulum_sympy(m, i_g, d):
    """omega^2 of the linearised compound pendulum from sympy.physics.mechanics (Lagrange)."""
    theta = me.dynamicsymbols("theta")
    frame, body_frame = me.ReferenceFrame("N"), me.ReferenceFrame("B")
    body_frame.orient_axis(frame, frame.z, theta)
    pivot = me.Point("O")
    pivot.set_vel(frame, 0)
    centre = pivot.locatenew("G", -d * body_frame.y)
    centre.v2pt_theory(pivot, frame, body_frame)
    inertia = me.inertia(body_frame, 0, 0, i_g)
    body = me.RigidBody("bar", centre, body_frame, m, (inertia, centre))
    body.potential_energy = m * G * centre.pos_from(pivot).dot(frame.y)
    lagrangian = me.Lagrangian(frame, body)
    method = me.LagrangesMethod(lagrangian, [theta])
    method.form_lagranges_equations()
    mass, forcing = method.mass_matrix[0], method.forcing[0]
    stiffness = -sp.diff(forcing / mass, theta).subs(theta, 0)
    return float(stiffness)


def test_physical_pendulum_matches_sympy_mechanics():
    p = {"m": 4.0, "I_G": 0.3, "d": 0.25, "g": G, "theta0": 0.05}
    omega2 = physical_pendulum_sympy(p["m"], p["I_G"], p["d"])
    values = get_case("physical_pendulum").evaluate(p)
    assert values["natural_frequency_hz"] == pytest.approx(math.sqrt(omega2) / (2 * math.pi),
                                                           rel=1e-12)


def test_uniform_rod_pivoted_at_its_end():
    # Meriam and Kraige, Dynamics 7th ed.: rod pivoted at one end, T = 2 pi sqrt(2L/(3g)),
    # equivalent simple pendulum 2L/3 (from memory)
    length, m = 0.9, 2.0
    p = {"m": m, "I_G": m * length ** 2 / 12, "d": length / 2, "g": G, "theta0": 0.05}
    values = get_case("physical_pendulum").evaluate(p)
    assert values["period_s"] == pytest.approx(2 * math.pi * math.sqrt(2 * length / (3 * G)),
                                               rel=1e-12)
    assert values["equivalent_length_m"] == pytest.approx(2 * length / 3, rel=1e-12)


# ---- pulleys and rolling ------------------------------------------------------

def atwood_sympy(m1, m2, inertia, r):
    """(acceleration of mass 1 down, rope tensions) from Kane's method with the sheave."""
    phi, u = me.dynamicsymbols("phi u")
    frame, sheave_frame = me.ReferenceFrame("N"), me.ReferenceFrame("S")
    sheave_frame.orient_axis(frame, frame.z, phi)
    sheave_frame.set_ang_vel(frame, u * frame.z)
    axle = me.Point("O")
    axle.set_vel(frame, 0)
    p1 = axle.locatenew("P1", -r * phi * frame.y)      # mass 1 descends as phi grows
    p2 = axle.locatenew("P2", r * phi * frame.y)
    p1.set_vel(frame, -r * u * frame.y)
    p2.set_vel(frame, r * u * frame.y)
    sheave = me.RigidBody("sheave", axle, sheave_frame, 1,
                          (me.inertia(sheave_frame, 0, 0, inertia), axle))
    bodies = [sheave, me.Particle("m1", p1, m1), me.Particle("m2", p2, m2)]
    loads = [(p1, -m1 * G * frame.y), (p2, -m2 * G * frame.y)]
    kane = me.KanesMethod(frame, q_ind=[phi], u_ind=[u], kd_eqs=[phi.diff() - u])
    fr, frstar = kane.kanes_equations(bodies, loads)
    alpha = sp.solve((fr + frstar)[0], u.diff())[0]
    a = float(r * alpha)
    return a, m1 * (G - a), m2 * (G + a)


def test_atwood_matches_kanes_method():
    p = {"m1": 30.0, "m2": 20.0, "I": 0.4, "r": 0.2, "g": G}
    a, t1, t2 = atwood_sympy(p["m1"], p["m2"], p["I"], p["r"])
    values = get_case("atwood_sheave").evaluate(p)
    assert values["acceleration_m_s2"] == pytest.approx(a, rel=1e-12)
    assert values["tension_1_N"] == pytest.approx(t1, rel=1e-12)
    assert values["tension_2_N"] == pytest.approx(t2, rel=1e-12)
    # the sheave balance: I alpha = r (T1 - T2)
    assert p["I"] * values["angular_acceleration_rad_s2"] == pytest.approx(
        p["r"] * (values["tension_1_N"] - values["tension_2_N"]), rel=1e-12)


def test_atwood_without_sheave_inertia():
    # Meriam and Kraige, Dynamics 7th ed.: ideal Atwood machine a = (m1 - m2) g / (m1 + m2),
    # T = 2 m1 m2 g / (m1 + m2) (from memory)
    values = get_case("atwood_sheave").evaluate({"m1": 3.0, "m2": 1.0, "I": 0.0, "r": 0.1, "g": G})
    assert values["acceleration_m_s2"] == pytest.approx(G / 2, rel=1e-14)
    assert values["tension_1_N"] == pytest.approx(2 * 3 * 1 * G / 4, rel=1e-14)
    assert values["tension_2_N"] == pytest.approx(values["tension_1_N"], rel=1e-14)


def rolling_sympy(m, r, inertia, alpha):
    """Acceleration down the slope of a wheel rolling without slip, Lagrange in sympy mechanics."""
    s = me.dynamicsymbols("s")
    frame, wheel_frame = me.ReferenceFrame("N"), me.ReferenceFrame("W")
    wheel_frame.orient_axis(frame, frame.z, -s / r)          # no slip: phi = s / r
    origin = me.Point("O")
    origin.set_vel(frame, 0)
    centre = origin.locatenew("C", s * frame.x)               # x down the slope
    centre.set_vel(frame, s.diff() * frame.x)
    wheel = me.RigidBody("wheel", centre, wheel_frame, m,
                         (me.inertia(wheel_frame, 0, 0, inertia), centre))
    wheel.potential_energy = -m * G * sp.sin(alpha) * s
    method = me.LagrangesMethod(me.Lagrangian(frame, wheel), [s])
    method.form_lagranges_equations()
    return float(method.forcing[0] / method.mass_matrix[0])


def test_rolling_matches_sympy_mechanics():
    p = {"m": 5.0, "r": 0.1, "I": 0.025, "alpha": 0.3, "g": G, "mu_s": 0.3}
    a = rolling_sympy(p["m"], p["r"], p["I"], p["alpha"])
    values = get_case("rolling_incline").evaluate(p)
    assert values["acceleration_m_s2"] == pytest.approx(a, rel=1e-12)
    # Newton along the slope for the centre: m a = m g sin(alpha) - F
    assert values["friction_force_N"] == pytest.approx(
        p["m"] * G * math.sin(p["alpha"]) - p["m"] * a, rel=1e-12)


@pytest.mark.parametrize("shape, inertia_factor, fraction", [
    ("solid cylinder", 0.5, 2 / 3), ("thin hoop", 1.0, 1 / 2), ("solid sphere", 0.4, 5 / 7)])
def test_rolling_shapes(shape, inertia_factor, fraction):
    # Meriam and Kraige, Dynamics 7th ed.: a = 2/3, 1/2, 5/7 of g sin(alpha) for cylinder,
    # hoop and sphere rolling without slip (from memory)
    m, r, alpha = 2.0, 0.05, 0.2
    values = get_case("rolling_incline").evaluate(
        {"m": m, "r": r, "I": inertia_factor * m * r * r, "alpha": alpha, "g": G, "mu_s": 1.0})
    assert values["acceleration_m_s2"] == pytest.approx(fraction * G * math.sin(alpha), rel=1e-14)


# ---- rotating systems -------------------------------------------------------------

def test_collar_matches_solve_ivp_and_the_drive_torque_balance():
    p = {"m": 0.5, "r0": 0.1, "Omega": 3.0, "t1": 0.5, "L_arm": 0.6}
    w = p["Omega"]
    sol = integrate(lambda t, y: [y[1], w * w * y[0]], [p["r0"], 0.0], 0.6)
    r1, v1 = sol.sol(p["t1"])
    values = get_case("collar_rotating_arm").evaluate(p)
    assert values["radius_m"] == pytest.approx(r1, rel=1e-10)
    assert values["radial_speed_m_s"] == pytest.approx(v1, rel=1e-10)
    # torque = rate of angular momentum m r^2 Omega, evaluated by a central difference
    h = 1e-5
    torque = p["m"] * w * (sol.sol(p["t1"] + h)[0] ** 2 - sol.sol(p["t1"] - h)[0] ** 2) / (2 * h)
    assert values["drive_torque_N_m"] == pytest.approx(torque, rel=1e-8)
    assert values["normal_force_N"] == pytest.approx(values["drive_torque_N_m"] / r1, rel=1e-12)


def test_collar_equation_from_sympy_mechanics_rotating_frame():
    r, m, omega, t = me.dynamicsymbols("r"), sp.Symbol("m"), sp.Symbol("Omega"), me.dynamicsymbols._t
    ground, arm = me.ReferenceFrame("N"), me.ReferenceFrame("A")
    arm.orient_axis(ground, ground.z, omega * t)
    axis = me.Point("O")
    axis.set_vel(ground, 0)
    collar = axis.locatenew("P", r * arm.x)
    collar.set_vel(ground, collar.pos_from(axis).dt(ground))
    method = me.LagrangesMethod(me.Lagrangian(ground, me.Particle("c", collar, m)), [r])
    equation = sp.simplify(method.form_lagranges_equations()[0] / m)
    # r'' - Omega^2 r = 0, so r0 cosh(Omega t) solves it with r'(0) = 0
    r0 = sp.Symbol("r0")
    residual = equation.subs(r, r0 * sp.cosh(omega * t)).doit()
    assert sp.simplify(residual) == 0


def conical_sympy(length, omega):
    """(relative equilibrium angle, small-oscillation omega^2) from sympy mechanics."""
    theta, t = me.dynamicsymbols("theta"), me.dynamicsymbols._t
    ground, spin, rod = me.ReferenceFrame("N"), me.ReferenceFrame("S"), me.ReferenceFrame("R")
    spin.orient_axis(ground, ground.z, omega * t)            # z up, along the spin axis
    rod.orient_axis(spin, spin.y, theta)
    hinge = me.Point("O")
    hinge.set_vel(ground, 0)
    bob = hinge.locatenew("P", -length * rod.z)
    bob.set_vel(ground, bob.pos_from(hinge).dt(ground))
    particle = me.Particle("bob", bob, 1)
    particle.potential_energy = G * bob.pos_from(hinge).dot(ground.z)
    method = me.LagrangesMethod(me.Lagrangian(ground, particle), [theta])
    method.form_lagranges_equations()
    x = sp.Symbol("x")
    accel = sp.simplify((method.forcing[0] / method.mass_matrix[0]).subs(theta.diff(), 0)
                        .subs(theta, x))
    angle = float(sp.nsolve(accel, x, 1.0, prec=30))
    omega2 = float(-sp.diff(accel, x).subs(x, angle))
    return angle, omega2


def test_conical_pendulum_matches_sympy_mechanics():
    p = {"L": 0.5, "Omega": 6.0, "g": G}
    angle, omega2 = conical_sympy(p["L"], p["Omega"])
    values = get_case("conical_pendulum").evaluate(p)
    assert values["cone_angle_rad"] == pytest.approx(angle, rel=1e-12)
    assert values["radius_m"] == pytest.approx(p["L"] * math.sin(angle), rel=1e-12)
    assert values["oscillation_frequency_hz"] == pytest.approx(math.sqrt(omega2) / (2 * math.pi),
                                                               rel=1e-10)


def test_conical_pendulum_newton_balance():
    # tension and weight: N cos(theta) = m g, N sin(theta) = m Omega^2 L sin(theta)
    p = {"L": 0.5, "Omega": 6.0, "g": G}
    theta = get_case("conical_pendulum").evaluate(p)["cone_angle_rad"]
    tension = p["Omega"] ** 2 * p["L"]                     # per unit mass
    assert tension * math.cos(theta) == pytest.approx(G, rel=1e-14)


def test_shaft_stiffness_matches_quadrature_of_the_polar_moment():
    p = {"J": 0.8, "G": 79.3e9, "d": 0.02, "L": 0.6, "T0": 50.0}
    polar, _ = quad(lambda rho: 2 * math.pi * rho ** 3, 0.0, p["d"] / 2, epsrel=1e-14)
    values = get_case("torsional_oscillator").evaluate(p)
    assert values["torsional_stiffness_N_m_per_rad"] == pytest.approx(p["G"] * polar / p["L"],
                                                                      rel=1e-12)


def test_torsional_response_to_a_suddenly_applied_torque_matches_solve_ivp():
    p = {"J": 0.8, "G": 79.3e9, "d": 0.02, "L": 0.6, "T0": 50.0}
    values = get_case("torsional_oscillator").evaluate(p)
    k_t = values["torsional_stiffness_N_m_per_rad"]
    sol = integrate(lambda t, y: [y[1], (p["T0"] - k_t * y[0]) / p["J"]], [0.0, 0.0], 0.3)
    t = np.linspace(0.0, 0.3, 30001)
    twist = sol.sol(t)[0]
    assert values["max_twist_rad"] == pytest.approx(twist.max(), rel=1e-7)
    half_period = t[np.argmax(twist)]
    assert values["period_s"] == pytest.approx(2 * half_period, rel=1e-4)
    assert values["static_twist_rad"] == pytest.approx(twist.max() / 2, rel=1e-7)
