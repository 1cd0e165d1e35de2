"""Closed forms of the vibration families checked against independent solutions.

Free, forced and multi-degree-of-freedom cases are checked against numpy
eigenvalues, scipy solve_ivp integrations, scipy quadrature and published
properties named beside each check.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import quad, solve_ivp
from scipy.linalg import eigh
from scipy.optimize import brentq, minimize_scalar

from calcsheaf.verification.handbook import get_case

SDOF = {"m": 12.0, "k": 4800.0, "c": 48.0}


def integrate(rhs, y0, t_end, t_eval=None):
    sol = solve_ivp(rhs, (0.0, t_end), y0, method="DOP853", rtol=1e-11, atol=1e-13,
                    t_eval=t_eval, dense_output=True)
    assert sol.success
    return sol


def steady_amplitude_phase(signal, omega, t0, periods=4):
    """Least-squares fit of a sin(wt) + b cos(wt) over whole periods: (amplitude, lag)."""
    t = np.linspace(t0, t0 + periods * 2 * math.pi / omega, 4001)
    y = signal(t)
    basis = np.column_stack([np.sin(omega * t), np.cos(omega * t)])
    (a, b), *_ = np.linalg.lstsq(basis, y, rcond=None)
    return math.hypot(a, b), math.atan2(-b, a)    # y = X sin(wt - phi): a = X cos phi, b = -X sin phi


def state_eigenvalues(p):
    a = np.array([[0.0, 1.0], [-p["k"] / p["m"], -p["c"] / p["m"]]])
    return np.linalg.eigvals(a)


def test_sdof_modal_quantities_match_the_state_matrix_eigenvalues():
    case = get_case("sdof_viscous")
    values = case.evaluate(SDOF)
    lam = state_eigenvalues(SDOF)[0]          # independent: numpy eig of the first-order form
    assert values["natural_frequency_hz"] == pytest.approx(abs(lam) / (2 * math.pi), rel=1e-12)
    assert values["damping_ratio"] == pytest.approx(-lam.real / abs(lam), rel=1e-12)
    assert values["damped_frequency_hz"] == pytest.approx(abs(lam.imag) / (2 * math.pi), rel=1e-12)


def test_sdof_free_response_and_decrement_match_solve_ivp():
    p = {**SDOF, "c": 24.0, "x0": 0.005, "v0": 0.1, "t1": 0.37}
    values = {**get_case("sdof_free_response").evaluate(p),
              **get_case("sdof_viscous").evaluate({n: p[n] for n in "mkc"})}
    sol = integrate(lambda t, y: [y[1], -(p["k"] * y[0] + p["c"] * y[1]) / p["m"]],
                    [p["x0"], p["v0"]], 3.0)
    x1, v1 = sol.sol(p["t1"])
    assert values["displacement_m"] == pytest.approx(x1, rel=1e-9)
    assert values["velocity_m_s"] == pytest.approx(v1, rel=1e-9)
    # decrement: ln of the ratio of two displacements one damped period apart
    td = values["damped_period_s"]
    ratio = sol.sol(0.5)[0] / sol.sol(0.5 + td)[0]
    assert values["log_decrement"] == pytest.approx(math.log(ratio), rel=1e-8)


def test_log_decrement_of_light_damping_is_about_two_pi_zeta():
    # Rao, Mechanical Vibrations 6th ed. section 2.6: delta ~ 2 pi zeta for small zeta (from memory)
    values = get_case("sdof_viscous").evaluate({"m": 1.0, "k": 1.0, "c": 0.002})
    assert values["log_decrement"] == pytest.approx(2 * math.pi * 0.001, rel=1e-6)


def test_static_deflection_frequency_rule_of_thumb_and_eigenvalue():
    case = get_case("static_deflection")
    # common practice: f [Hz] ~ 15.76 / sqrt(delta [mm]) for g = 9.80665 m/s^2
    f = case.evaluate({"g": 9.80665, "delta": 0.025})["natural_frequency_hz"]
    assert f == pytest.approx(15.76 / math.sqrt(25.0), rel=2e-4)
    # independent: spring rate k = m g / delta, eigenvalue sqrt(k/m)
    m, g, delta = 250.0, 9.80665, 0.025
    k = m * g / delta
    assert f == pytest.approx(math.sqrt(eigh([[k]], [[m]], eigvals_only=True)[0]) / (2 * math.pi),
                              rel=1e-12)


def test_forced_sdof_amplitude_and_phase_match_a_solve_ivp_steady_state():
    case = get_case("sdof_forced")
    p = {**SDOF, "F0": 150.0, "f_hz": 2.5}
    values = case.evaluate(p)
    w = 2 * math.pi * p["f_hz"]
    sol = integrate(lambda t, y: [y[1], (p["F0"] * math.sin(w * t) - p["k"] * y[0]
                                         - p["c"] * y[1]) / p["m"]], [0.0, 0.0], 12.0)
    amp, lag = steady_amplitude_phase(lambda t: sol.sol(t)[0], w, 10.0)
    assert values["amplitude_m"] == pytest.approx(amp, rel=1e-7)
    assert values["phase_rad"] == pytest.approx(lag, rel=1e-7)
    assert values["amplitude_ratio"] == pytest.approx(p["k"] * amp / p["F0"], rel=1e-7)


def test_forced_sdof_at_resonance_amplifies_by_one_over_two_zeta():
    # Rao, Mechanical Vibrations 6th ed. section 3.4: X k / F0 = 1/(2 zeta), phi = pi/2 at r = 1
    # (from memory)
    p = {"m": 1.0, "k": (2 * math.pi) ** 2, "c": 0.1 * 2 * (2 * math.pi), "F0": 1.0, "f_hz": 1.0}
    values = get_case("sdof_forced").evaluate(p)
    assert values["amplitude_ratio"] == pytest.approx(1 / (2 * 0.1), rel=1e-12)
    assert values["phase_rad"] == pytest.approx(math.pi / 2, rel=1e-12)


def test_force_transmissibility_matches_the_transmitted_force_of_solve_ivp():
    case = get_case("transmissibility_force")
    p = {**SDOF, "f_hz": 5.0}
    w = 2 * math.pi * p["f_hz"]
    sol = integrate(lambda t, y: [y[1], (math.sin(w * t) - p["k"] * y[0] - p["c"] * y[1])
                                  / p["m"]], [0.0, 0.0], 12.0)
    amp, _ = steady_amplitude_phase(
        lambda t: p["k"] * sol.sol(t)[0] + p["c"] * sol.sol(t)[1], w, 10.0)
    assert case.evaluate(p)["transmissibility"] == pytest.approx(amp, rel=1e-7)


@pytest.mark.parametrize("c", [10.0, 48.0, 400.0])
def test_transmissibility_is_one_at_root_two_for_any_damping(c):
    # Rao, Mechanical Vibrations 6th ed. section 9.10: all transmissibility curves pass through
    # T = 1 at r = sqrt(2) (from memory)
    p = {"m": 12.0, "k": 4800.0, "c": c, "f_hz": math.sqrt(2) * 20.0 / (2 * math.pi)}
    assert get_case("transmissibility_force").evaluate(p)["transmissibility"] == \
        pytest.approx(1.0, rel=1e-12)
    base = get_case("transmissibility_base").evaluate(p)
    assert base["displacement_transmissibility"] == pytest.approx(1.0, rel=1e-12)


def test_base_transmissibility_matches_solve_ivp_with_moving_base():
    case = get_case("transmissibility_base")
    p = {**SDOF, "f_hz": 5.0}
    w, big_y = 2 * math.pi * p["f_hz"], 1.5e-3

    def rhs(t, y):
        base, base_v = big_y * math.sin(w * t), big_y * w * math.cos(w * t)
        return [y[1], (p["k"] * (base - y[0]) + p["c"] * (base_v - y[1])) / p["m"]]

    sol = integrate(rhs, [0.0, 0.0], 12.0)
    absolute, _ = steady_amplitude_phase(lambda t: sol.sol(t)[0], w, 10.0)
    relative, _ = steady_amplitude_phase(lambda t: sol.sol(t)[0] - big_y * np.sin(w * t), w, 10.0)
    values = case.evaluate(p)
    assert values["displacement_transmissibility"] == pytest.approx(absolute / big_y, rel=1e-7)
    assert values["relative_transmissibility"] == pytest.approx(relative / big_y, rel=1e-7)


def test_energy_per_cycle_matches_quadrature_of_damper_power():
    case = get_case("energy_per_cycle")
    p = {"c": 48.0, "X": 0.002, "f_hz": 2.5}
    w = 2 * math.pi * p["f_hz"]
    energy, _ = quad(lambda t: p["c"] * (p["X"] * w * math.cos(w * t)) ** 2, 0.0, 1 / p["f_hz"])
    values = case.evaluate(p)
    assert values["energy_per_cycle_J"] == pytest.approx(energy, rel=1e-12)
    assert values["mean_power_W"] == pytest.approx(energy * p["f_hz"], rel=1e-12)


def test_energy_per_cycle_equals_work_of_the_force_in_steady_state():
    # independent route: work of F0 sin(wt) over a cycle is pi F0 X sin(phi)
    # (Rao, Mechanical Vibrations 6th ed. section 2.6.4, from memory)
    p = {**SDOF, "F0": 150.0, "f_hz": 2.5}
    forced = get_case("sdof_forced").evaluate(p)
    work = math.pi * p["F0"] * forced["amplitude_m"] * math.sin(forced["phase_rad"])
    dissipated = get_case("energy_per_cycle").evaluate(
        {"c": p["c"], "X": forced["amplitude_m"], "f_hz": p["f_hz"]})["energy_per_cycle_J"]
    assert dissipated == pytest.approx(work, rel=1e-12)


def test_rotating_unbalance_matches_solve_ivp():
    case = get_case("rotating_unbalance")
    p = {"M": 40.0, "m_u": 0.5, "e": 0.02, "k": 1.6e5, "c": 500.0, "Omega": 2 * math.pi * 8}
    w = p["Omega"]
    force = p["m_u"] * p["e"] * w * w
    sol = integrate(lambda t, y: [y[1], (force * math.sin(w * t) - p["k"] * y[0]
                                         - p["c"] * y[1]) / p["M"]], [0.0, 0.0], 5.0)
    amp, lag = steady_amplitude_phase(lambda t: sol.sol(t)[0], w, 4.0)
    transmitted, _ = steady_amplitude_phase(
        lambda t: p["k"] * sol.sol(t)[0] + p["c"] * sol.sol(t)[1], w, 4.0)
    values = case.evaluate(p)
    assert values["amplitude_m"] == pytest.approx(amp, rel=1e-7)
    assert values["phase_rad"] == pytest.approx(lag, rel=1e-7)
    assert values["transmitted_force_N"] == pytest.approx(transmitted, rel=1e-7)


def test_rotating_unbalance_tends_to_m_e_over_m_at_high_speed():
    # Rao, Mechanical Vibrations 6th ed. section 3.7: M X / (m e) -> 1 as r -> infinity
    # (from memory)
    p = {"M": 40.0, "m_u": 0.5, "e": 0.02, "k": 1.6e5, "c": 500.0, "Omega": 1e5}
    assert get_case("rotating_unbalance").evaluate(p)["normalised_amplitude"] == \
        pytest.approx(1.0, rel=1e-5)


CHAIN = {"m1": 10.0, "m2": 5.0, "k1": 2000.0, "k2": 1000.0, "k3": 500.0}


def test_two_mass_chain_matches_the_generalised_eigenproblem():
    values = get_case("two_mass_chain").evaluate(CHAIN)
    k = np.array([[CHAIN["k1"] + CHAIN["k2"], -CHAIN["k2"]],
                  [-CHAIN["k2"], CHAIN["k2"] + CHAIN["k3"]]])
    m = np.diag([CHAIN["m1"], CHAIN["m2"]])
    f1, f2 = np.sqrt(eigh(k, m, eigvals_only=True)) / (2 * math.pi)
    assert values["mode_1_frequency_hz"] == pytest.approx(f1, rel=1e-12)
    assert values["mode_2_frequency_hz"] == pytest.approx(f2, rel=1e-12)


def test_two_equal_masses_and_springs():
    # Rao, Mechanical Vibrations 6th ed. section 5.3: m, k, equal: omega = sqrt(k/m), sqrt(3k/m)
    # (from memory)
    values = get_case("two_mass_chain").evaluate({"m1": 1, "m2": 1, "k1": 1, "k2": 1, "k3": 1})
    assert values["mode_1_frequency_hz"] * 2 * math.pi == pytest.approx(1.0, rel=1e-14)
    assert values["mode_2_frequency_hz"] * 2 * math.pi == pytest.approx(math.sqrt(3), rel=1e-14)


ABSORBER = {"M": 100.0, "k": 1.0e5, "m_a": 5.0}


def main_amplification(p, k_a, c_a, omega):
    """|x1| k / F0 of the undamped main mass with a damped absorber (numpy complex solve)."""
    m = np.diag([p["M"], p["m_a"]])
    k = np.array([[p["k"] + k_a, -k_a], [-k_a, k_a]])
    c = np.array([[c_a, -c_a], [-c_a, c_a]])
    x = np.linalg.solve(k - omega ** 2 * m + 1j * omega * c, [1.0, 0.0])
    return abs(x[0]) * p["k"]


def absorber_design(p):
    values = get_case("tuned_mass_absorber").evaluate(p)
    return values, values["absorber_stiffness_N_m"], values["absorber_damping_N_s_m"]


def fixed_point_omegas(p, k_a):
    """Frequencies where the response does not depend on damping (undamped = infinitely damped)."""
    def gap(w):
        return main_amplification(p, k_a, 0.0, w) - main_amplification(p, k_a, 1e9, w)
    wn = math.sqrt(p["k"] / p["M"])
    grid = np.linspace(0.5 * wn, 1.5 * wn, 801)
    gaps = np.array([gap(w) for w in grid])
    roots = [brentq(gap, grid[i], grid[i + 1]) for i in range(len(grid) - 1)
             if np.isfinite(gaps[i] * gaps[i + 1]) and gaps[i] * gaps[i + 1] < 0
             and abs(gaps[i]) < 1e3 and abs(gaps[i + 1]) < 1e3]
    return roots


def test_absorber_fixed_points_are_independent_of_damping_and_equally_high():
    values, k_a, c_a = absorber_design(ABSORBER)
    roots = fixed_point_omegas(ABSORBER, k_a)
    assert len(roots) == 2
    heights = [main_amplification(ABSORBER, k_a, c_a, w) for w in roots]
    # Den Hartog 4th ed. section 3.3: equal heights sqrt(1 + 2/mu) at optimum tuning (from memory)
    assert heights == pytest.approx([values["fixed_point_amplification"]] * 2, rel=1e-7)


def test_absorber_optimum_damping_lies_between_the_flat_at_p_and_flat_at_q_values():
    values, k_a, c_a = absorber_design(ABSORBER)
    roots = fixed_point_omegas(ABSORBER, k_a)
    wn = math.sqrt(ABSORBER["k"] / ABSORBER["M"])

    def slope(c, w, h=1e-4):
        return (main_amplification(ABSORBER, k_a, c, w * (1 + h))
                - main_amplification(ABSORBER, k_a, c, w * (1 - h))) / (2 * h)

    flat = [brentq(lambda c: slope(c, w), 0.2 * c_a, 5 * c_a) for w in roots]
    ratios = sorted((c / (2 * ABSORBER["m_a"] * wn)) ** 2 for c in flat)
    # Den Hartog's optimum is the mean of the two squared damping ratios (from memory)
    assert ratios[0] < values["optimum_damping_ratio"] ** 2 < ratios[1]
    assert values["optimum_damping_ratio"] ** 2 == pytest.approx(sum(ratios) / 2, rel=2e-3)


@pytest.mark.parametrize("mu", [0.05, 0.25])
def test_absorber_true_peak_is_within_half_a_percent_of_the_fixed_point_height(mu):
    p = {**ABSORBER, "m_a": mu * ABSORBER["M"]}
    values, k_a, c_a = absorber_design(p)
    wn = math.sqrt(p["k"] / p["M"])
    grid = np.linspace(0.6 * wn, 1.4 * wn, 6001)
    peak = max(main_amplification(p, k_a, c_a, w) for w in grid)
    assert peak >= values["fixed_point_amplification"] * (1 - 1e-9)
    assert peak == pytest.approx(values["peak_amplification"], rel=5e-3)


def test_absorber_tuning_is_the_min_max_optimum_over_tuning():
    # independent: numerically minimise the higher fixed point over the absorber stiffness
    values, _, _ = absorber_design(ABSORBER)
    wn = math.sqrt(ABSORBER["k"] / ABSORBER["M"])

    def worst_fixed_point(ratio):
        k_a = ABSORBER["m_a"] * (ratio * wn) ** 2
        return max(main_amplification(ABSORBER, k_a, 0.0, w) for w in fixed_point_omegas(
            ABSORBER, k_a))

    best = minimize_scalar(worst_fixed_point, bounds=(0.9, 1.0), method="bounded",
                           options={"xatol": 1e-7})
    assert values["optimum_frequency_ratio"] == pytest.approx(best.x, rel=1e-5)
