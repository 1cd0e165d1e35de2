"""Derived equations of motion against outside references.

Each system is written twice: once as a calc file (energies typed by hand) and
once in sympy.physics.mechanics from particles, frames and loads, where gravity,
dampers and torques enter as loads (forcelist), not as energies.  Mass matrix M
and right-hand side f of M q̈ = f must agree at random states to 1e-12.
Constrained systems are compared through the solved accelerations and
multipliers, and against the hand solution.
"""

from __future__ import annotations

import numpy as np
import pytest
import sympy as sp
from sympy.physics import mechanics as me

from calcsheaf.errors import CalcsheafError, DerivationError
from calcsheaf.mechanics.codegen import NumericSystem
from calcsheaf.pipeline import analyse_one

from helpers_calc import derivation_of, write_calc

TIME = me.dynamicsymbols._t
RTOL = 1e-12


def calc(number: str, params: str, coordinates: str, energy: str, initial: str, extra: str = "") -> str:
    return f"""
    [calc]
    number = "{number}"
    title = "derivation test"

    [parameters]
    {params}

    [coordinates]
    {coordinates}

    [energy]
    {energy}

    [initial]
    {initial}
    {extra}
    """


def numbers(expr, values: dict) -> float:
    return float(sp.N(expr.xreplace(values), 30))


def reference_matrices(lm: me.LagrangesMethod, qs, params: dict, q, qd, t):
    """sympy's M and f at one state (parameters by name)."""
    subs = {sp.Symbol(k): v for k, v in params.items()}
    for s, a, b in zip(qs, q, qd):
        subs[s.diff(TIME)] = b
        subs[s] = a
    subs[TIME] = t
    M = np.array([[numbers(e, subs) for e in row] for row in lm.mass_matrix.tolist()])
    f = np.array([numbers(e, subs) for e in lm.forcing])
    return M, f


def assert_same_equations(system: NumericSystem, lm, qs, params, rng, states=6, spread=1.5, t_max=3.0):
    lm.form_lagranges_equations()
    for _ in range(states):
        q = rng.uniform(-spread, spread, len(qs))
        qd = rng.uniform(-spread, spread, len(qs))
        t = float(rng.uniform(0.0, t_max))
        M, f, _, _ = system.matrices(t, q, qd)
        M_ref, f_ref = reference_matrices(lm, qs, params, q, qd, t)
        np.testing.assert_allclose(M, M_ref, rtol=RTOL, atol=RTOL * np.abs(M_ref).max())
        np.testing.assert_allclose(f, f_ref, rtol=RTOL, atol=RTOL * max(1.0, np.abs(f_ref).max()))


@pytest.fixture
def rng():
    return np.random.default_rng(20240611)


def origin():
    N = me.ReferenceFrame("N")
    O = me.Point("O")
    O.set_vel(N, 0)
    return N, O


def particle_at(name: str, O, N, position, mass):
    P = O.locatenew(name, position)
    P.set_vel(N, position.dt(N))
    return P, me.Particle(f"{name}_body", P, mass)


def test_damped_spring_mass_under_gravity(tmp_path, rng):
    spec, d = derivation_of(tmp_path, calc(
        "D-1", 'm = "3.5 kg"\n    k = "1800 N/m"\n    c = "14 N*s/m"\n    g = "9.80665 m/s^2"',
        'x = { unit = "m", label = "up" }',
        'kinetic = "m/2*dot(x)**2"\n    potential = "k/2*x**2 + m*g*x"\n    dissipation = "c/2*dot(x)**2"',
        'x = "0 m"\n    "dot(x)" = "0 m/s"'))
    m, k, c, g = sp.symbols("m k c g")
    x = me.dynamicsymbols("x")
    N, O = origin()
    P, body = particle_at("P", O, N, x * N.y, m)
    body.potential_energy = k * x ** 2 / 2
    loads = [(P, -m * g * N.y - c * x.diff(TIME) * N.y)]
    lm = me.LagrangesMethod(me.Lagrangian(N, body), [x], forcelist=loads, frame=N)
    assert_same_equations(NumericSystem(d, spec.parameter_values), lm, [x], spec.parameter_values, rng)


def test_simple_pendulum(tmp_path, rng):
    spec, d = derivation_of(tmp_path, calc(
        "D-2", 'm = "2 kg"\n    L = "0.8 m"\n    g = "9.81 m/s^2"',
        'theta = { unit = "rad" }',
        'kinetic = "m/2*L**2*dot(theta)**2"\n    potential = "-m*g*L*cos(theta)"',
        'theta = "0.1 rad"\n    "dot(theta)" = "0 rad/s"'))
    m, L, g = sp.symbols("m L g")
    th = me.dynamicsymbols("theta")
    N, O = origin()
    P, body = particle_at("P", O, N, L * sp.sin(th) * N.x - L * sp.cos(th) * N.y, m)
    lm = me.LagrangesMethod(me.Lagrangian(N, body), [th], forcelist=[(P, -m * g * N.y)], frame=N)
    assert_same_equations(NumericSystem(d, spec.parameter_values), lm, [th], spec.parameter_values, rng)


def test_double_pendulum_with_joint_dampers(tmp_path, rng):
    """Point masses on massless links; a damper at the pivot and one across the elbow."""
    spec, d = derivation_of(tmp_path, calc(
        "D-3", 'm1 = "1.5 kg"\n    m2 = "0.7 kg"\n    L1 = "0.9 m"\n    L2 = "0.6 m"\n    g = "9.81 m/s^2"\n'
               '    c1 = "0.3 N*m*s"\n    c2 = "0.2 N*m*s"',
        'th1 = { unit = "rad" }\n    th2 = { unit = "rad" }',
        'kinetic = "m1/2*L1**2*dot(th1)**2 + m2/2*(L1**2*dot(th1)**2 + L2**2*dot(th2)**2 '
        '+ 2*L1*L2*dot(th1)*dot(th2)*cos(th1 - th2))"\n'
        '    potential = "-(m1 + m2)*g*L1*cos(th1) - m2*g*L2*cos(th2)"\n'
        '    dissipation = "c1/2*dot(th1)**2 + c2/2*(dot(th2) - dot(th1))**2"',
        'th1 = "0.2 rad"\n    th2 = "0 rad"\n    "dot(th1)" = "0 rad/s"\n    "dot(th2)" = "0 rad/s"'))
    m1, m2, L1, L2, g, c1, c2 = sp.symbols("m1 m2 L1 L2 g c1 c2")
    th1, th2 = me.dynamicsymbols("th1 th2")
    w1, w2 = th1.diff(TIME), th2.diff(TIME)
    N, O = origin()
    A = N.orientnew("A", "Axis", [th1, N.z])
    B = N.orientnew("B", "Axis", [th2, N.z])
    P1, b1 = particle_at("P1", O, N, -L1 * A.y, m1)
    P2, b2 = particle_at("P2", O, N, -L1 * A.y - L2 * B.y, m2)
    elbow = -c2 * (w2 - w1) * N.z
    loads = [(P1, -m1 * g * N.y), (P2, -m2 * g * N.y),
             (A, -c1 * w1 * N.z - elbow), (B, elbow)]
    lm = me.LagrangesMethod(me.Lagrangian(N, b1, b2), [th1, th2], forcelist=loads, frame=N)
    assert_same_equations(NumericSystem(d, spec.parameter_values), lm, [th1, th2],
                          spec.parameter_values, rng)


def test_collar_on_arm_rotating_at_prescribed_rate(tmp_path, rng):
    """Arm in a vertical plane at angle Omega*t; T written in fixed axes, so it depends on t."""
    spec, d = derivation_of(tmp_path, calc(
        "D-4", 'm = "0.4 kg"\n    Omega = "3 rad/s"\n    g = "9.81 m/s^2"\n    c = "0.5 N*s/m"\n'
               '    k = "20 N/m"\n    r0 = "0.3 m"',
        'r = { unit = "m", label = "collar distance from the hub" }',
        'kinetic = "m/2*((dot(r)*cos(Omega*t) - r*Omega*sin(Omega*t))**2 '
        '+ (dot(r)*sin(Omega*t) + r*Omega*cos(Omega*t))**2)"\n'
        '    potential = "m*g*r*sin(Omega*t) + k/2*(r - r0)**2"\n'
        '    dissipation = "c/2*dot(r)**2"',
        'r = "0.3 m"\n    "dot(r)" = "0 m/s"'))
    assert d.M.has(sp.Symbol("t", real=True)) or d.f.has(sp.Symbol("t", real=True))
    m, Om, g, c, k, r0 = sp.symbols("m Omega g c k r0")
    r = me.dynamicsymbols("r")
    N, O = origin()
    A = N.orientnew("A", "Axis", [Om * TIME, N.z])
    P, body = particle_at("P", O, N, r * A.x, m)
    body.potential_energy = k * (r - r0) ** 2 / 2
    loads = [(P, -m * g * N.y - c * r.diff(TIME) * A.x)]
    lm = me.LagrangesMethod(me.Lagrangian(N, body), [r], forcelist=loads, frame=N)
    assert_same_equations(NumericSystem(d, spec.parameter_values), lm, [r], spec.parameter_values, rng)


SHEAVE = calc(
    "D-5", 'm1 = "3 kg"\n    m2 = "5 kg"\n    J = "0.02 kg*m^2"\n    Rs = "0.1 m"\n    g = "9.81 m/s^2"\n'
           '    L_rope = "2 m"\n    y10 = "1 m"',
    'y1 = { unit = "m", label = "height of mass 1" }\n    y2 = { unit = "m", label = "height of mass 2" }\n'
    '    phi = { unit = "rad", label = "sheave rotation" }',
    'kinetic = "m1/2*dot(y1)**2 + m2/2*dot(y2)**2 + J/2*dot(phi)**2"\n'
    '    potential = "m1*g*y1 + m2*g*y2"',
    'y1 = "1 m"\n    y2 = "1 m"\n    phi = "0 rad"\n    "dot(y1)" = "0 m/s"\n    "dot(y2)" = "0 m/s"\n'
    '    "dot(phi)" = "0 rad/s"',
    '''
    [[constraint]]
    name = "T2"
    equation = "y1 + y2 - L_rope"
    label = "rope tension on the side of mass 2"

    [[constraint]]
    name = "dT"
    equation = "y1 - Rs*phi - y10"
    label = "tension difference across the sheave"
    ''')


def test_two_masses_on_a_rope_over_a_sheave(tmp_path, rng):
    """Constrained dynamics against sympy (hol_coneqs) and against the hand solution."""
    spec, d = derivation_of(tmp_path, SHEAVE)
    params = spec.parameter_values
    system = NumericSystem(d, params)

    m1, m2, J, Rs, g, Lr = sp.symbols("m1 m2 J Rs g L_rope")
    y1, y2, phi = me.dynamicsymbols("y1 y2 phi")
    N, O = origin()
    P1, b1 = particle_at("P1", O, N, y1 * N.y, m1)
    P2, b2 = particle_at("P2", O, N, y2 * N.y, m2)
    S = N.orientnew("S", "Axis", [phi, N.z])
    hub = O.locatenew("H", 0 * N.x)
    hub.set_vel(N, 0)
    wheel = me.RigidBody("wheel", hub, S, 1, (me.inertia(S, 0, 0, J), hub))
    lm = me.LagrangesMethod(me.Lagrangian(N, b1, b2, wheel), [y1, y2, phi],
                            hol_coneqs=[y1 + y2 - Lr, y1 - Rs * phi - 1],
                            forcelist=[(P1, -m1 * g * N.y), (P2, -m2 * g * N.y)], frame=N)
    lm.form_lagranges_equations()
    # sympy's mass_matrix rows read M q̈ − Φ_qᵀ λ = forcing, the convention calcsheaf uses.
    rhs = lm.rhs()
    for _ in range(4):
        q = np.array([rng.uniform(0.5, 1.5), 0.0, 0.0])
        q[1] = params["L_rope"] - q[0]
        q[2] = (q[0] - 1.0) / params["Rs"]
        v = rng.uniform(-1, 1)
        qd = np.array([v, -v, v / params["Rs"]])
        qdd, lam = system.accelerations(0.0, q, qd)
        subs = {sp.Symbol(k): val for k, val in params.items()}
        for s, a, b in zip((y1, y2, phi), q, qd):
            subs[s.diff(TIME)] = b
            subs[s] = a
        reference = np.array([numbers(e, subs) for e in rhs])
        np.testing.assert_allclose(qdd, reference[3:6], rtol=RTOL, atol=1e-12)
        np.testing.assert_allclose(lam, reference[6:8], rtol=RTOL, atol=1e-12)

        # Hand solution (free bodies of the two masses and the sheave):
        # a1 = (m2 − m1) g / (m1 + m2 + J/Rs²); rope side 1 tension T1 = m1 (g + a1),
        # side 2 T2 = m2 (g − a1); the sheave's moment balance gives T1 − T2 = J a1/Rs².
        M1, M2, JJ, R, G = (params[k] for k in ("m1", "m2", "J", "Rs", "g"))
        a1 = (M2 - M1) * G / (M1 + M2 + JJ / R ** 2)
        T1, T2 = M1 * (G + a1), M2 * (G - a1)
        np.testing.assert_allclose(qdd, [a1, -a1, a1 / R], rtol=1e-12)
        np.testing.assert_allclose(lam, [T2, T1 - T2], rtol=1e-12)


def test_disc_rolling_without_slip_down_an_incline(tmp_path):
    """a = (2/3) g sin(alpha) and friction force (1/3) m g sin(alpha) for a uniform disc.

    J. L. Meriam, L. G. Kraige, Engineering Mechanics: Dynamics, ch. 6, plane kinetics
    of rigid bodies, rolling without slip on an incline (from memory).
    """
    spec, d = derivation_of(tmp_path, calc(
        "D-6", 'm = "12 kg"\n    rd = "0.25 m"\n    g = "9.81 m/s^2"\n    alpha = "20 deg"',
        's = { unit = "m", label = "distance down the slope" }\n    th = { unit = "rad" }',
        'kinetic = "m/2*dot(s)**2 + (m*rd**2/2)/2*dot(th)**2"\n    potential = "-m*g*s*sin(alpha)"',
        's = "0 m"\n    th = "0 rad"\n    "dot(s)" = "0 m/s"\n    "dot(th)" = "0 rad/s"',
        '\n    [[constraint]]\n    name = "F_f"\n    equation = "s - rd*th"\n'))
    p = spec.parameter_values
    qdd, lam = NumericSystem(d, p).accelerations(0.0, np.zeros(2), np.zeros(2))
    a = 2 / 3 * p["g"] * np.sin(p["alpha"])
    assert qdd[0] == pytest.approx(a, rel=1e-13)
    assert qdd[1] == pytest.approx(a / p["rd"], rel=1e-13)
    # The multiplier acts on s as +λ: m a = m g sin α + λ, so λ = −(1/3) m g sin α (friction up the slope).
    assert lam[0] == pytest.approx(-p["m"] * p["g"] * np.sin(p["alpha"]) / 3, rel=1e-13)


def test_point_forces_by_virtual_work_match_hand_derivation(tmp_path):
    """Q_j = Σ F·∂r/∂q_j for a force at the tip of an arm θ on a slider z (3-D)."""
    spec, d = derivation_of(tmp_path, calc(
        "D-7", 'm = "2 kg"\n    a = "0.5 m"\n    Fx = "3 N"\n    Fy = "-4 N"\n    Fz = "7 N"\n    J = "0.3 kg*m^2"',
        'th = { unit = "rad" }\n    z = { unit = "m" }',
        'kinetic = "J/2*dot(th)**2 + m/2*dot(z)**2"',
        'th = "0 rad"\n    z = "0 m"\n    "dot(th)" = "0 rad/s"\n    "dot(z)" = "0 m/s"',
        '''
    [generalized_forces]
    z = "-2*Fz"

    [[point_force]]
    position = ["a*cos(th)", "a*sin(th)", "z"]
    force = ["Fx", "Fy", "Fz"]

    [[point_force]]
    position = ["a*cos(th)", "0", "0"]
    force = ["Fy*sin(th)", "0", "0"]
    '''))
    th, z = sp.Symbol("th", real=True), sp.Symbol("z", real=True)
    a, Fx, Fy, Fz = (sp.Symbol(n, real=True) for n in ("a", "Fx", "Fy", "Fz"))
    # By hand: r = (a cos θ, a sin θ, z): ∂r/∂θ = (−a sin θ, a cos θ, 0), ∂r/∂z = (0, 0, 1);
    # second force: ∂r/∂θ = (−a sin θ, 0, 0).
    hand_th = -Fx * a * sp.sin(th) + Fy * a * sp.cos(th) - Fy * sp.sin(th) * a * sp.sin(th)
    hand_z = Fz - 2 * Fz
    assert sp.simplify(d.Q[0] - hand_th) == 0
    assert sp.simplify(d.Q[1] - hand_z) == 0
    assert sp.simplify(d.f[0] - hand_th) == 0


def test_coulomb_friction_by_abs_in_dissipation(tmp_path, rng):
    """R = mu N |ẋ| gives the friction force −mu N sign(ẋ); R = c|ẋ|³/3 gives −c ẋ|ẋ|;
    a generalized force −F0 sign(ẋ) passes through unchanged."""
    spec, d = derivation_of(tmp_path, calc(
        "D-8", 'm = "4 kg"\n    k = "250 N/m"\n    mu = "0.3"\n    Fn = "39.2 N"\n    c3 = "2 N*s^2/m^2"\n    F0 = "1.5 N"',
        'x = { unit = "m" }',
        'kinetic = "m/2*dot(x)**2"\n    potential = "k/2*x**2"\n'
        '    dissipation = "mu*Fn*abs(dot(x)) + c3*abs(dot(x))**3/3"',
        'x = "0.1 m"\n    "dot(x)" = "0 m/s"', '[generalized_forces]\n    x = "-F0*sign(dot(x))"'))
    p = spec.parameter_values
    system = NumericSystem(d, p)
    for _ in range(6):
        x, v = rng.uniform(-1, 1, 2)
        _, f, _, _ = system.matrices(0.0, [x], [v])
        hand = -p["k"] * x - p["mu"] * p["Fn"] * np.sign(v) - p["c3"] * v * abs(v) - p["F0"] * np.sign(v)
        assert f[0] == pytest.approx(hand, rel=1e-13)
    # No Derivative() of a non-smooth function survives (real symbols make d|v|/dv = sign v).
    assert not d.f.has(sp.Derivative)
    assert not d.f.has(sp.DiracDelta)


def test_mass_matrix_not_positive_definite_names_the_kinetic_energy(tmp_path):
    text = calc("D-9", 'm = "1 kg"', 'x = { unit = "m" }\n    y = { unit = "m" }',
                'kinetic = "m/2*(dot(x) + dot(y))**2"',
                'x = "0 m"\n    y = "0 m"\n    "dot(x)" = "0 m/s"\n    "dot(y)" = "0 m/s"')
    report = analyse_one(write_calc(tmp_path, text))
    assert isinstance(report.error, DerivationError)
    assert report.error.key == "energy.kinetic"
    assert "positive definite" in report.error.problem
    assert report.error.line is not None


def test_every_step_is_kept_as_data(tmp_path):
    spec, d = derivation_of(tmp_path, calc(
        "D-10", 'm = "1 kg"\n    k = "10 N/m"\n    c = "1 N*s/m"', 'x = { unit = "m" }',
        'kinetic = "m/2*dot(x)**2"\n    potential = "k/2*x**2"\n    dissipation = "c/2*dot(x)**2"',
        'x = "0 m"\n    "dot(x)" = "0 m/s"'))
    m, k, c, x = (sp.Symbol(n, real=True) for n in ("m", "k", "c", "x"))
    xd, xdd = sp.Symbol("dot(x)", real=True), sp.Symbol("ddot(x)", real=True)
    by_symbol = {s.symbol: s.expr for s in d.steps}
    assert sp.simplify(by_symbol["L = T - V"] - (m / 2 * xd ** 2 - k / 2 * x ** 2)) == 0
    values = [s.expr for s in d.steps if s.coordinate == "x"]
    assert [sp.simplify(v) for v in values] == [m * xd, m * xdd, -k * x, c * xd, 0]
    assert sp.simplify(d.equations[0].expr - (m * xdd + c * xd + k * x)) == 0


def test_one_sided_spring_by_step_derives_without_dirac_delta(tmp_path, rng):
    """Regression: d(x² step(x))/dx gave x² DiracDelta(x) terms, which the generated code
    could not evaluate (NameError).  Derivatives are taken almost everywhere."""
    spec, d = derivation_of(tmp_path, calc(
        "D-11", 'm = "2 kg"\n    k = "900 N/m"\n    c = "3 N*s/m"',
        'x = { unit = "m" }',
        'kinetic = "m/2*dot(x)**2"\n    potential = "k/2*x**2*step(x)"\n'
        '    dissipation = "c/2*dot(x)**2*step(dot(x))"',
        'x = "0.01 m"\n    "dot(x)" = "0 m/s"'))
    assert not d.f.has(sp.DiracDelta) and not d.energy_function.has(sp.DiracDelta)
    p = spec.parameter_values
    system = NumericSystem(d, p)
    for _ in range(6):
        x, v = rng.uniform(-1, 1, 2)
        _, f, _, _ = system.matrices(0.0, [x], [v])
        # By hand, away from x = 0 and v = 0: F = −k x H(x) − c v H(v).
        assert f[0] == pytest.approx(-p["k"] * x * (x > 0) - p["c"] * v * (v > 0), rel=1e-13)
