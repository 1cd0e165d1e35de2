"""The equations of motion checked a second way (issue 12, item 11).

verification/lagrange_check.py evaluates Lagrange's equations numerically from the
calc's T, V, R and forces and compares them with the derived M q̈ − f, G and γ.
Here: it passes on correct derivations, and it fails on copies of
mechanics/lagrange.py with planted defects (a dropped term, a wrong sign), loaded
from a temporary file.  Two systems with velocity-dependent explicit time terms in
T (a pendulum whose support moves, base motion written in T) are also compared
with their closed-form equations, so deleting ∂p/∂t from d/dt(∂L/∂q̇) fails here.
"""

from __future__ import annotations

import importlib.util
import math
import sys
from pathlib import Path

import numpy as np
import pytest

import calcsheaf.analysis
from calcsheaf.calcfile.loader import load_calc
from calcsheaf.mechanics import lagrange
from calcsheaf.mechanics.codegen import NumericSystem
from calcsheaf.mechanics.lagrange import derive
from calcsheaf.pipeline import analyse_one
from calcsheaf.verification.lagrange_check import TOLERANCE, check_equations

from helpers_calc import check, write_calc

m, l, g, c, X, W, Fw = 1.5, 0.6, 9.80665, 0.4, 0.05, 7.0, 2.0

# Pendulum hung from a support that moves as X sin Ωt, written in T (absolute velocity of
# the bob), with a joint damper and a horizontal point force F_w on the bob.
PENDULUM = f"""
[calc]
number = "E-1"
title = "pendulum on a moving support"

[parameters]
m = "{m} kg"
l = "{l} m"
g = "{g} m/s^2"
c = "{c} N*m*s"
X = "{X} m"
Omega = "{W} rad/s"
F_w = "{Fw} N"

[coordinates]
theta = {{ unit = "rad" }}

[energy]
kinetic = "m/2*((X*Omega*cos(Omega*t) + l*cos(theta)*dot(theta))**2 + (l*sin(theta)*dot(theta))**2)"
potential = "-m*g*l*cos(theta)"
dissipation = "c/2*dot(theta)**2"

[[point_force]]
position = ["X*sin(Omega*t) + l*sin(theta)", "-l*cos(theta)"]
force = ["F_w", "0"]

[initial]
theta = "0.2 rad"
"dot(theta)" = "0 rad/s"

[analysis]
equilibrium = false
modes = false
"""

# Base motion written in T: two masses in series on a base moving as Y sin Ωt, coordinates
# relative to the base.
mb1, mb2, k1, k2, cb, Y = 2.0, 1.0, 900.0, 400.0, 3.0, 0.01
BASE = f"""
[calc]
number = "E-2"
title = "base motion written in T"

[parameters]
m1 = "{mb1} kg"
m2 = "{mb2} kg"
k1 = "{k1} N/m"
k2 = "{k2} N/m"
c = "{cb} N*s/m"
Y = "{Y} m"
Omega = "{W} rad/s"

[coordinates]
z1 = {{ unit = "m" }}
z2 = {{ unit = "m" }}

[energy]
kinetic = "m1/2*(dot(z1) + Y*Omega*cos(Omega*t))**2 + m2/2*(dot(z2) + Y*Omega*cos(Omega*t))**2"
potential = "k1/2*z1**2 + k2/2*(z2 - z1)**2"
dissipation = "c/2*dot(z1)**2"

[initial]
z1 = "0 m"
z2 = "0 m"
"dot(z1)" = "0 m/s"
"dot(z2)" = "0 m/s"

[analysis]
equilibrium = false
modes = false
"""

# Cart on a rail with a pendulum (coupled M), and a bead held on a rod turning at Ω by a
# rheonomic constraint (G and γ depend on t).
CART = """
[calc]
number = "E-3"
title = "cart and pendulum"

[parameters]
M = "4 kg"
m = "1.2 kg"
l = "0.5 m"
g = "9.80665 m/s^2"
k = "300 N/m"

[coordinates]
x = { unit = "m" }
theta = { unit = "rad" }

[energy]
kinetic = "M/2*dot(x)**2 + m/2*((dot(x) + l*cos(theta)*dot(theta))**2 + (l*sin(theta)*dot(theta))**2)"
potential = "k/2*x**2 - m*g*l*cos(theta)"

[initial]
x = "0.01 m"
theta = "0.3 rad"
"dot(x)" = "0 m/s"
"dot(theta)" = "0 rad/s"
"""

BEAD = """
[calc]
number = "E-4"
title = "bead on a turning rod"

[parameters]
m = "0.3 kg"
k = "50 N/m"
Omega = "3 rad/s"

[coordinates]
x = { unit = "m" }
y = { unit = "m" }

[energy]
kinetic = "m/2*(dot(x)**2 + dot(y)**2)"
potential = "k/2*(x**2 + y**2)"

[[constraint]]
name = "N_rod"
equation = "y*cos(Omega*t) - x*sin(Omega*t)"
unit = "N"

[initial]
x = "0.1 m"
y = "0 m"
"dot(x)" = "0 m/s"
"dot(y)" = "0.3 m/s"

[analysis]
equilibrium = false
modes = false
"""

CALCS = {"pendulum": PENDULUM, "base": BASE, "cart": CART, "bead": BEAD}


def spec_of(tmp_path, name: str):
    return load_calc(write_calc(tmp_path, CALCS[name], f"{name}.toml"))


def planted(tmp_path, original: str, defect: str, name: str):
    """A copy of mechanics/lagrange.py with `original` replaced by `defect`, imported."""
    source = Path(lagrange.__file__).read_text(encoding="utf-8")
    assert source.count(original) == 1, original
    source = source.replace(original, defect).replace("from ..", "from calcsheaf.")
    path = tmp_path / f"lagrange_{name}.py"
    path.write_text(source, encoding="utf-8")
    module_spec = importlib.util.spec_from_file_location(f"lagrange_{name}", path)
    module = importlib.util.module_from_spec(module_spec)
    sys.modules[module_spec.name] = module          # dataclasses look their module up
    module_spec.loader.exec_module(module)
    return module


@pytest.mark.parametrize("name", sorted(CALCS))
def test_correct_derivations_pass(tmp_path, name):
    spec = spec_of(tmp_path, name)
    result = check_equations(spec, NumericSystem(derive(spec), spec.parameter_values))
    assert result.states == 3
    assert result.passed, result.worst
    assert result.worst.value < 1e-12


# (calc, text in lagrange.py, planted defect, part expected to fail)
DEFECTS = [
    ("pendulum", "+ diff_ae(p, TIME)\n", "\n", "f of theta"),            # ∂p/∂t dropped
    ("base", "+ diff_ae(p, TIME)\n", "\n", "f of z"),
    ("pendulum", "Q[i] + dL_dq[i] - dR_dqd[i]", "Q[i] + dL_dq[i] + dR_dqd[i]", "f of theta"),
    ("cart", "Q[i] + dL_dq[i] - dR_dqd[i] - rest[i]", "Q[i] + dL_dq[i] - dR_dqd[i] + rest[i]", "f of"),
    ("cart", "diff_ae(dL_dqd[i], qd[j])", "diff_ae(dL_dqd[i], qd[i])", "M of"),
    ("pendulum", "F * diff_ae(r, qj)", "F * diff_ae(r, qj) * 2", "f of theta"),
    ("bead", "G = jacobian_ae(g, q)", "G = -jacobian_ae(g, q)", "G of N_rod"),
    ("bead", "+ velocity_constraint.applyfunc(lambda e: diff_ae(e, TIME)))",
     ")", "γ of N_rod"),
]


@pytest.mark.parametrize("calc, original, defect, part", DEFECTS)
def test_planted_defects_fail(tmp_path, calc, original, defect, part):
    copy = planted(tmp_path, original, defect, f"{calc}_{abs(hash(defect)) % 10**6}")
    spec = spec_of(tmp_path, calc)
    result = check_equations(spec, NumericSystem(copy.derive(spec), spec.parameter_values))
    assert not result.passed
    assert result.worst.value > 1e3 * TOLERANCE
    assert result.worst.where.startswith(part)


def test_a_derivation_defect_fails_the_calc(tmp_path, monkeypatch):
    copy = planted(tmp_path, "+ diff_ae(p, TIME)\n", "\n", "calc")
    monkeypatch.setattr(calcsheaf.analysis, "derive", copy.derive)
    report = analyse_one(write_calc(tmp_path, BASE, "base.toml"))
    equations = check(report, "equations")
    assert len(equations) == 1 and not equations[0].passed
    assert "f of z" in equations[0].detail and "tolerance 1e-09" in equations[0].detail
    assert not report.passed


def test_the_check_is_listed_and_passes_on_a_correct_calc(tmp_path):
    report = analyse_one(write_calc(tmp_path, PENDULUM, "pendulum.toml"))
    (equations,) = check(report, "equations")
    assert equations.passed
    assert "3 random states" in equations.detail and "50-digit" in equations.detail


def test_pendulum_on_a_moving_support_matches_its_closed_form(tmp_path):
    """m l² θ̈ = −m g l sin θ + m l X Ω² sin Ωt cos θ − c θ̇ + F_w l cos θ.

    Reference: L. D. Landau and E. M. Lifshitz, Mechanics, 3rd ed., §5, problem 3(b),
    pendulum whose support oscillates horizontally (from memory), with a joint damper
    and a horizontal force at the bob added by virtual work.
    """
    spec = spec_of(tmp_path, "pendulum")
    system = NumericSystem(derive(spec), spec.parameter_values)
    rng = np.random.default_rng(5)
    for _ in range(5):
        th, thd, t = rng.uniform(-1.5, 1.5), rng.uniform(-2, 2), rng.uniform(0, 3)
        (thdd,), _ = system.accelerations(t, [th], [thd])
        expected = (-m * g * l * math.sin(th) + m * l * X * W ** 2 * math.sin(W * t) * math.cos(th)
                    - c * thd + Fw * l * math.cos(th)) / (m * l ** 2)
        assert thdd == pytest.approx(expected, rel=1e-12, abs=1e-12)


def test_base_motion_written_in_T_matches_its_closed_form(tmp_path):
    """m_i z̈_i + (spring, damper forces) = m_i Y Ω² sin Ωt on coordinates relative to the base.

    Reference: S. S. Rao, Mechanical Vibrations, base excitation in relative coordinates
    (m z̈ + c ż + k z = −m ÿ_base), from memory; ÿ_base = −Y Ω² sin Ωt for y = Y sin Ωt.
    """
    spec = spec_of(tmp_path, "base")
    system = NumericSystem(derive(spec), spec.parameter_values)
    rng = np.random.default_rng(6)
    for _ in range(5):
        z, zd, t = rng.uniform(-0.02, 0.02, 2), rng.uniform(-0.3, 0.3, 2), rng.uniform(0, 3)
        qdd, _ = system.accelerations(t, z, zd)
        drive = Y * W ** 2 * math.sin(W * t)
        expected = [(-k1 * z[0] + k2 * (z[1] - z[0]) - cb * zd[0]) / mb1 + drive,
                    -k2 * (z[1] - z[0]) / mb2 + drive]
        np.testing.assert_allclose(qdd, expected, rtol=1e-12, atol=1e-12)


def test_states_where_an_expression_is_undefined_are_skipped(tmp_path):
    # sqrt(l² − x²) is real only for |x| < l: draws outside are replaced, never reported.
    text = CART.replace('potential = "k/2*x**2 - m*g*l*cos(theta)"',
                        'potential = "k/2*x**2 - m*g*sqrt(l**2 - x**2)"').replace('"0.01 m"', '"0.45 m"')
    spec = load_calc(write_calc(tmp_path, text, "sqrt.toml"))
    result = check_equations(spec, NumericSystem(derive(spec), spec.parameter_values))
    assert result.states == 3 and result.passed, result.worst


def test_unconstrained_derivation_has_empty_constraint_terms(tmp_path):
    # No constraint: G is 0×n and γ is 0×1 (Gᵀλ and G q̈ = γ vanish), in the derivation and
    # in the compiled function the integrators call.
    spec = spec_of(tmp_path, "cart")
    d = derive(spec)
    assert d.G.shape == (0, 2) and d.gamma.shape == (0, 1) and d.g.shape == (0, 0)
    M, f, G, gamma = NumericSystem(d, spec.parameter_values).matrices(0.3, [0.01, 0.2], [0.1, -0.4])
    assert M.shape == (2, 2) and f.shape == (2,) and G.shape == (0, 2) and gamma.shape == (0,)
