"""The energy function, the powers and the audit's classification, against hand forms.

Fast tests (no time history) that pin the pieces of the energy audit one by one:
h = Σ q̇ ∂L/∂q̇ − L (the Jacobi integral; H. Goldstein, Classical Mechanics, 3rd ed.,
§2.7, from memory), which is T₂ − T₀ + V when T = T₂ + T₁ + T₀ is split by degree in
the velocities; the dissipated power q̇·∂R/∂q̇ = n R for R homogeneous of degree n
(Euler's theorem on homogeneous functions); Q·q̇; ∂L/∂t; and the audit's verdicts on
hand-made histories whose residual is known.
"""

from __future__ import annotations

import numpy as np
import pytest
import sympy as sp

from calcsheaf.calcfile.expressions import TIME, symbol, velocity
from calcsheaf.mechanics.energy import audit, homogeneity_degree, natural, switch_times, time_switches

from helpers_calc import derivation_of

CALC = """
[calc]
number = "H-1"
title = "energy function"

[parameters]
m = "2 kg"
k = "30 N/m"
c = "0.7 N*s/m"
Omega = "3 rad/s"
F = "5 N"
b = "0.4 m"
c3 = "0.7 N*s^2/m^2"
t1 = "0.4 s"

[coordinates]
r = {{ unit = "m" }}
s = {{ unit = "m" }}

[energy]
kinetic = "{T}"
potential = "{V}"
dissipation = "{R}"

[generalized_forces]
r = "{Q}"
s = "0"

[initial]
r = "0.5 m"
s = "0 m"
"dot(r)" = "0 m/s"
"dot(s)" = "0 m/s"
"""

m, k, c, W, F, b = 2.0, 30.0, 0.7, 3.0, 5.0, 0.4
r, s, rd, sd = symbol("r"), symbol("s"), velocity("r"), velocity("s")


def derived(tmp_path, T="m/2*(dot(r)**2 + dot(s)**2)", V="k/2*(r**2 + s**2)", R="c/2*dot(r)**2", Q="F"):
    spec, d = derivation_of(tmp_path, CALC.format(T=T, V=V, R=R, Q=Q))
    return spec, d


def at(expr, params, **state):
    values = {symbol(n): v for n, v in params.items()}
    values.update({r: state.get("r", 0.3), s: state.get("s", -0.2), rd: state.get("rd", 0.7),
                   sd: state.get("sd", -1.1), TIME: state.get("t", 0.9)})
    return float(expr.xreplace(values))


def test_energy_function_of_a_rotating_arm_is_T2_minus_T0_plus_V(tmp_path):
    # T = m/2 (ṙ² + r²Ω²) + m/2 ṡ² + m b Ω ṡ: T₂ = m/2 (ṙ² + ṡ²), T₁ = m b Ω ṡ, T₀ = m/2 r²Ω².
    T = "m/2*(dot(r)**2 + r**2*Omega**2) + m/2*dot(s)**2 + m*b*Omega*dot(s)"
    spec, d = derived(tmp_path, T=T)
    p = spec.parameter_values
    rv, sv, rdv, sdv = 0.3, -0.2, 0.7, -1.1
    expected = m / 2 * (rdv ** 2 + sdv ** 2) - m / 2 * rv ** 2 * W ** 2 + k / 2 * (rv ** 2 + sv ** 2)
    assert at(d.energy_function, p) == pytest.approx(expected, rel=1e-14)
    assert not natural(d, p)


def test_natural_system_h_equals_T_plus_V(tmp_path):
    spec, d = derived(tmp_path)
    p = spec.parameter_values
    assert at(d.energy_function, p) == pytest.approx(at(d.T + d.V, p), rel=1e-14)
    assert natural(d, p)


def test_time_in_L_is_not_natural_and_its_rate_is_dL_dt(tmp_path):
    spec, d = derived(tmp_path, V="k/2*(r**2 + s**2) - F*r*sin(Omega*t)")
    p = spec.parameter_values
    assert not natural(d, p)
    # ∂L/∂t = −∂V/∂t = F r Ω cos Ωt.
    assert at(d.explicit_time_rate, p, r=0.3, t=0.9) == pytest.approx(F * 0.3 * W * np.cos(W * 0.9), rel=1e-14)


def test_powers_by_hand(tmp_path):
    spec, d = derived(tmp_path, R="c3/3*abs(dot(r))**3 + c/2*dot(s)**2", Q="F*cos(Omega*t)")
    p = spec.parameter_values
    # q̇·∂R/∂q̇ = c|ṙ|³ + c ṡ²;  Q·q̇ = F cos Ωt ṙ.
    assert at(d.dissipated_power, p) == pytest.approx(c * 0.7 ** 3 + c * 1.1 ** 2, rel=1e-14)
    assert at(d.input_power, p) == pytest.approx(F * np.cos(W * 0.9) * 0.7, rel=1e-14)


@pytest.mark.parametrize("R, degree", [("c/2*dot(r)**2", 2.0), ("c3/3*abs(dot(r))**3", 3.0),
                                       ("F*abs(dot(r))", 1.0), ("F*b*Omega*log(cosh(dot(r)/(b*Omega)))", None),
                                       ("0", None)])
def test_homogeneity_degree_of_R(tmp_path, R, degree):
    spec, d = derived(tmp_path, R=R)
    found = homogeneity_degree(d, spec.parameter_values)
    assert found == (None if degree is None else pytest.approx(degree, rel=1e-12))


def test_time_switches_are_the_step_and_sign_arguments_of_t_alone(tmp_path):
    V = "k/2*(r**2 + s**2) - F*r*step(t - b/(b*Omega)) + F*s*sign(t - 1/Omega)*step(r - t*b*Omega)"
    spec, d = derived(tmp_path, V=V)
    found = time_switches(d, spec.parameter_values)
    # step(t − 1/Ω) and sign(t − 1/Ω) switch at t = 1/3 s; step(r − bΩ t) depends on r: not counted.
    assert len(found) == 1
    assert switch_times(found[0], 1.0) == [pytest.approx(1 / W, rel=1e-15)]


def test_switch_times_include_exact_zeros_and_the_ends():
    t = TIME
    assert switch_times(t, 2.0) == [0.0]
    assert switch_times(t - 2, 2.0) == [2.0]
    assert switch_times(t - sp.Float(0.5), 2.0) == [0.5]
    assert switch_times(t + 1, 2.0) == []
    assert switch_times((t - 1) ** 2 + 1, 2.0) == []


def history(d, p, t, x, v, a):
    """audit() inputs for a one-coordinate-of-two history (s held at 0)."""
    Q = np.vstack([x, np.zeros_like(x)])
    QD = np.vstack([v, np.zeros_like(v)])
    QDD = np.vstack([a, np.zeros_like(a)])
    return Q, QD, QDD, np.zeros((0, len(t)))


def exact_state(t, w):
    y = np.atleast_1d(t)
    return np.array([0.1 * np.cos(w * y), np.zeros_like(y), -0.1 * w * np.sin(w * y), np.zeros_like(y)]).reshape(4, -1)[:, 0]


def test_audit_of_an_exact_free_vibration_passes_and_a_wrong_one_fails(tmp_path):
    spec, d = derived(tmp_path, R="0", Q="0")
    p = spec.parameter_values
    w = np.sqrt(k / m)
    t = np.linspace(0.0, 2.0, 201)
    x, v = 0.1 * np.cos(w * t), -0.1 * w * np.sin(w * t)
    zero = np.zeros_like(t)
    good = audit(d, p, t, *history(d, p, t, x, v, -w ** 2 * x), zero, zero, 1e-6,
                 state=lambda ts: exact_state(ts, w))
    assert good.passed and good.max_relative_residual < 1e-12 and good.natural
    # 1 % too fast: T + V is no longer constant, the residual is about 2 % of the energy.
    w2 = 1.01 * w
    x2, v2 = 0.1 * np.cos(w2 * t), -0.1 * w2 * np.sin(w2 * t)
    bad = audit(d, p, t, *history(d, p, t, x2, v2, -w2 ** 2 * x2), zero, zero, 1e-6,
                state=lambda ts: exact_state(ts, w2))
    assert not bad.passed
    assert bad.max_relative_residual == pytest.approx(0.0201, rel=0.02)
    np.testing.assert_allclose(bad.residual, bad.h - bad.h[0], atol=1e-15)


def test_audit_residual_is_h_minus_h0_plus_dissipated_minus_work_in(tmp_path):
    spec, d = derived(tmp_path, R="0", Q="0")
    p = spec.parameter_values
    t = np.linspace(0.0, 1.0, 11)
    x, v, a = 0.1 + 0 * t, 0 * t, 0 * t
    dissipated, work_in = 0.01 * t, 0.03 * t
    e = audit(d, p, t, *history(d, p, t, x, v, a), dissipated, work_in, 1e-6,
              state=lambda ts: np.array([0.1, 0.0, 0.0, 0.0]))
    np.testing.assert_allclose(e.residual, dissipated - work_in, atol=1e-15)
    # Scale: the largest of peak T (0), range of V (0), range of h (0), W_d (0.01), W_in (0.03).
    assert e.max_relative_residual == pytest.approx(0.02 / 0.03, rel=1e-12)
    np.testing.assert_allclose(e.V, k / 2 * 0.01, rtol=1e-14)
    np.testing.assert_allclose(e.T, 0.0, atol=1e-15)
    assert not e.passed and e.tolerance == 1e-6


def test_audit_of_a_step_load_counts_minus_delta_L(tmp_path):
    # V = k/2 (r² + s²) − F r step(t − t1), the state held at r = 0.1: h jumps by −F·0.1 at
    # t1 = 0.4 s; a sample exactly at t1 (step(0) = 1/2) carries half of it.
    spec, d = derived(tmp_path, V="k/2*(r**2 + s**2) - F*r*step(t - t1)", R="0", Q="0")
    p = spec.parameter_values
    t = np.array([0.0, 0.2, 0.4, 0.5, 1.0])
    x, zero = 0.1 + 0 * t, 0 * t
    e = audit(d, p, t, *history(d, p, t, x, zero, zero), zero, zero, 1e-6,
              state=lambda ts: np.array([0.1, 0.0, 0.0, 0.0]))
    np.testing.assert_allclose(e.work_in, [0.0, 0.0, -0.25, -0.5, -0.5], atol=1e-15)
    np.testing.assert_allclose(e.residual, 0.0, atol=1e-15)
    assert e.passed
