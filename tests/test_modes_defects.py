"""Issue 12, items 2 to 5: equilibrium of driven systems, instability, modes of
non-classical damping and gyroscopic shapes.  Each check names its outside reference.
"""

from __future__ import annotations

import json
import math
import textwrap

import numpy as np
import pytest
import scipy.linalg as sla

from calcsheaf.commands.check import check as check_command
from calcsheaf.errors import ProblemList
from calcsheaf.calcfile.loader import load_calc
from calcsheaf.render.html import render_calc
from calcsheaf.render.json import results_dict

from helpers_calc import check, report_of, result, write_calc
from test_render_fixtures import THEME_ONLY_ROOT, project

G = 9.80665


def calc(body: str, number: str = "M-1", title: str = "modes defect") -> str:
    return f'[calc]\nnumber = "{number}"\ntitle = "{title}"\n' + textwrap.dedent(body)


def state_roots(M, C, K) -> np.ndarray:
    """Eigenvalues of [[0, I], [−M⁻¹K, −M⁻¹C]] by scipy.linalg.eig (the outside computation)."""
    n = len(M)
    Minv = np.linalg.inv(M)
    A = np.block([[np.zeros((n, n)), np.eye(n)], [-Minv @ K, -Minv @ C]])
    return sla.eig(A)[0]


# --------------------------------------------------------------------------------------
# Item 2: a bead on a hoop turned at a constant rate by a constraint
# --------------------------------------------------------------------------------------
HOOP = dict(m=0.1, R=0.5, Omega=8.0)


def hoop_calc(drive: str = "phi - Omega*t", Omega: float = HOOP["Omega"], th0: float = 1.0,
              rate: float | None = None) -> str:
    rate = Omega if rate is None else rate
    return calc(f"""
    [parameters]
    m = "{HOOP['m']} kg"
    R = "{HOOP['R']} m"
    Omega = "{Omega} rad/s"
    alpha = "2 rad/s^2"
    g = "{G} m/s^2"

    [coordinates]
    th = {{ unit = "rad", label = "bead angle from the bottom" }}
    phi = {{ unit = "rad", label = "hoop angle about the vertical" }}

    [energy]
    kinetic = "m/2*R**2*(dot(th)**2 + sin(th)**2*dot(phi)**2)"
    potential = "-m*g*R*cos(th)"

    [[constraint]]
    name = "M_drive"
    equation = "{drive}"
    unit = "N*m"

    [initial]
    th = "{th0} rad"
    phi = "0 rad"
    "dot(th)" = "0 rad/s"
    "dot(phi)" = "{rate} rad/s"

    [[result]]
    name = "f1"
    expr = "natural_frequency(1)"
    unit = "Hz"
    """, "H-1", "bead on a driven hoop")


def test_driven_hoop_keeps_the_prescribed_rate_and_finds_the_relative_equilibrium(tmp_path):
    """Regression: "stable at θ = 0, 0.705 Hz" (φ̇ set to zero).  Bead on a hoop turning at Ω:
    θ̈ = sin θ (Ω² cos θ − g/R), so θ_eq = acos(g/(RΩ²)) and ω² = Ω² sin² θ_eq
    (standard result, e.g. J. R. Taylor, Classical Mechanics, 2005, ch. 7, bead on a
    spinning hoop; from memory; the linearisation is redone by hand here)."""
    report = report_of(tmp_path, hoop_calc())
    assert report.passed, [c for c in report.checks if not c.passed]
    R, W = HOOP["R"], HOOP["Omega"]
    th_eq = math.acos(G / (R * W * W))
    eq = report.equilibrium
    assert eq.kind == "steady motion" and eq.time_s == 0.0
    assert eq.values["th"] == pytest.approx(th_eq, rel=1e-10)
    assert eq.velocities == {"phi": pytest.approx(W, rel=1e-12)}
    f = W * math.sin(th_eq) / (2 * math.pi)
    assert f == pytest.approx(1.2120, abs=5e-5)          # the value
    assert result(report, "f1") == pytest.approx(f, rel=1e-9)
    assert report.modes[0].kind == "oscillatory"
    assert report.linearisation.velocities == pytest.approx((0.0, W))
    assert "prescribe" in check(report, "equilibrium")[0].detail


def test_hoop_written_with_the_rate_in_T_gives_the_same_answer(tmp_path):
    """The same bead with θ alone and T = m R²(θ̇² + Ω² sin² θ)/2 (same reference)."""
    report = report_of(tmp_path, calc(f"""
    [parameters]
    m = "{HOOP['m']} kg"
    R = "{HOOP['R']} m"
    Omega = "{HOOP['Omega']} rad/s"
    g = "{G} m/s^2"

    [coordinates]
    th = {{ unit = "rad" }}

    [energy]
    kinetic = "m/2*R**2*(dot(th)**2 + sin(th)**2*Omega**2)"
    potential = "-m*g*R*cos(th)"

    [initial]
    th = "1 rad"
    "dot(th)" = "0 rad/s"
    """))
    th_eq = math.acos(G / (HOOP["R"] * HOOP["Omega"] ** 2))
    assert report.equilibrium.kind == "static"
    assert report.equilibrium.values["th"] == pytest.approx(th_eq, rel=1e-10)
    assert report.modes[0].natural_frequency_rad_s == pytest.approx(
        HOOP["Omega"] * math.sin(th_eq), rel=1e-9)


def test_hoop_below_the_critical_rate_rests_at_the_bottom(tmp_path):
    """Ω² < g/R: θ = 0 is the stable relative equilibrium with ω² = g/R − Ω² (same reference)."""
    W = 3.0
    report = report_of(tmp_path, hoop_calc(Omega=W, th0=0.3))
    assert report.passed, [c for c in report.checks if not c.passed]
    assert report.equilibrium.values["th"] == pytest.approx(0.0, abs=1e-10)
    assert report.equilibrium.kind == "steady motion"
    assert report.modes[0].natural_frequency_rad_s == pytest.approx(
        math.sqrt(G / HOOP["R"] - W * W), rel=1e-9)


def test_hoop_on_the_unstable_branch_is_reported_unstable(tmp_path):
    """Above the critical rate θ = 0 is a relative equilibrium with θ̈ = (Ω² − g/R) θ, growth
    rate √(Ω² − g/R) (same reference); a search started near it finds it and must fail."""
    report = report_of(tmp_path, hoop_calc(th0=0.05))
    assert report.equilibrium.values["th"] == pytest.approx(0.0, abs=1e-12)
    assert not report.equilibrium.stable and not report.passed
    sigma = math.sqrt(HOOP["Omega"] ** 2 - G / HOOP["R"])
    assert report.equilibrium.growth_rate_per_s == pytest.approx(sigma, rel=1e-9)


def test_accelerating_drive_has_no_steady_motion_and_says_the_time_is_frozen(tmp_path):
    """φ = α t²/2 prescribes a changing rate: no steady motion exists, so the equilibrium
    is static at t = 0 with every velocity zero, and the page and check say so."""
    report = report_of(tmp_path, hoop_calc(drive="phi - alpha*t**2/2", th0=0.4, rate=0.0))
    eq = report.equilibrium
    assert eq.kind == "static, time frozen" and eq.velocities == {}
    assert eq.values["th"] == pytest.approx(0.0, abs=1e-10)
    assert "prescribed ones included" in eq.note and "t = 0 s" in eq.note
    assert "time frozen" in check(report, "equilibrium")[0].detail


# --------------------------------------------------------------------------------------
# Item 3: prescribed base motion is not a static load
# --------------------------------------------------------------------------------------
BASE = dict(m=1.0, k=1000.0, c=4.0, Y=0.02, Omega=40.0)


def base_calc(phase: float = 0.0, gravity: bool = False) -> str:
    weight = " + m*g*x" if gravity else ""
    return calc(f"""
    [parameters]
    m = "{BASE['m']} kg"
    k = "{BASE['k']} N/m"
    c = "{BASE['c']} N*s/m"
    Y = "{BASE['Y']} m"
    Omega = "{BASE['Omega']} rad/s"
    p0 = "{phase} rad"
    g = "{G} m/s^2"

    [coordinates]
    x = {{ unit = "mm", label = "mass displacement, positive up" }}

    [energy]
    kinetic = "m/2*dot(x)**2"
    potential = "k/2*(x - Y*sin(Omega*t + p0))**2{weight}"
    dissipation = "c/2*(dot(x) - Y*Omega*cos(Omega*t + p0))**2"

    [initial]
    x = "0 m"
    "dot(x)" = "0 m/s"
    """, "B-1", "support moving as Y sin(Omega t)")


def test_base_motion_velocity_is_not_a_static_load(tmp_path):
    """Regression: the damper force c Y Ω at t = 0 was taken as a static load (x = 3.2 mm).
    With every velocity zero, prescribed ones included, the spring alone holds the mass:
    x = Y sin(p0) − m g/k (statics by hand)."""
    report = report_of(tmp_path, base_calc())
    eq = report.equilibrium
    assert BASE["c"] * BASE["Y"] * BASE["Omega"] / BASE["k"] == pytest.approx(3.2e-3)   # the false value
    assert eq.values["x"] == pytest.approx(0.0, abs=1e-12)
    assert eq.kind == "static, time frozen" and eq.time_s == 0.0
    assert "prescribed ones included" in eq.note
    p0 = 0.7
    moved = report_of(tmp_path / "b", base_calc(phase=p0, gravity=True)).equilibrium
    expected = BASE["Y"] * math.sin(p0) - BASE["m"] * G / BASE["k"]
    assert moved.values["x"] == pytest.approx(expected * 1e3, rel=1e-10)      # mm


def test_base_motion_through_a_constraint_is_frozen_too(tmp_path):
    """The support as a coordinate y held to Y sin Ωt: no steady motion, y = 0 and x = −m g/k
    at t = 0 (statics by hand); the prescribed velocity YΩ is not kept."""
    report = report_of(tmp_path, calc(f"""
    [parameters]
    m = "1 kg"
    ms = "0.5 kg"
    k = "1000 N/m"
    c = "4 N*s/m"
    Y = "0.02 m"
    Omega = "40 rad/s"
    g = "{G} m/s^2"

    [coordinates]
    x = {{ unit = "m" }}
    y = {{ unit = "m" }}

    [energy]
    kinetic = "m/2*dot(x)**2 + ms/2*dot(y)**2"
    potential = "k/2*(x - y)**2 + m*g*x"
    dissipation = "c/2*(dot(x) - dot(y))**2"

    [[constraint]]
    name = "F_base"
    equation = "y - Y*sin(Omega*t)"
    unit = "N"

    [initial]
    x = "0 m"
    y = "0 m"
    "dot(x)" = "0 m/s"
    "dot(y)" = "0.8 m/s"
    """))
    eq = report.equilibrium
    assert eq.kind == "static, time frozen" and eq.velocities == {}
    assert eq.values["x"] == pytest.approx(-G / 1000, rel=1e-10)
    assert eq.values["y"] == pytest.approx(0.0, abs=1e-12)


# --------------------------------------------------------------------------------------
# Item 4: instability is a finding
# --------------------------------------------------------------------------------------
CART = dict(M=2.0, m=0.5, L=0.6)


def cart_calc(expect: str = "") -> str:
    return calc(f"""
    [parameters]
    M = "{CART['M']} kg"
    m = "{CART['m']} kg"
    L = "{CART['L']} m"
    g = "{G} m/s^2"

    [coordinates]
    x = {{ unit = "m", label = "cart position" }}
    th = {{ unit = "rad", label = "pendulum angle from upright" }}

    [energy]
    kinetic = "M/2*dot(x)**2 + m/2*((dot(x) + L*cos(th)*dot(th))**2 + (L*sin(th)*dot(th))**2)"
    potential = "m*g*L*cos(th)"

    [initial]
    x = "0 m"
    th = "0.01 rad"
    "dot(x)" = "0 m/s"
    "dot(th)" = "0 rad/s"
    {expect}
    """, "U-1", "inverted pendulum on a free cart")


def cart_sigma() -> float:
    """Largest real root by scipy.linalg.eig of the hand-linearised cart and pendulum:
    M = [[M+m, mL], [mL, mL²]], K = diag(0, −m g L) (point mass at the rod's end)."""
    M, m, L = CART["M"], CART["m"], CART["L"]
    s = state_roots(np.array([[M + m, m * L], [m * L, m * L * L]]), np.zeros((2, 2)),
                    np.array([[0.0, 0.0], [0.0, -m * G * L]]))
    return float(max(s.real))


def test_inverted_pendulum_on_a_cart_is_unstable_and_fails(tmp_path):
    """Regression: reported as a 0 Hz mode with passed: true.  Growth rate
    σ = √(g (M + m)/(M L)) (linearised cart and pendulum, e.g. K. Ogata, Modern Control
    Engineering, inverted pendulum on a cart; from memory), checked by scipy.linalg.eig."""
    report = report_of(tmp_path, cart_calc())
    sigma = math.sqrt(G * (CART["M"] + CART["m"]) / (CART["M"] * CART["L"]))
    assert cart_sigma() == pytest.approx(sigma, rel=1e-10)
    assert not report.passed and not report.equilibrium.stable
    failed = [c for c in report.checks if not c.passed]
    assert [c.kind for c in failed] == ["stability"]
    assert "expect_unstable = true" in failed[0].detail and "growth rate 4.52 1/s" in failed[0].detail
    unstable = [md for md in report.modes if md.kind == "unstable"]
    assert len(unstable) == 1
    md = unstable[0]
    assert md.growth_rate_per_s == pytest.approx(sigma, rel=1e-9)
    assert md.doubling_time_s == pytest.approx(math.log(2) / sigma, rel=1e-9)
    assert math.isnan(md.natural_frequency_hz)                  # not "0 Hz"
    assert report.equilibrium.growth_rate_per_s == pytest.approx(sigma, rel=1e-9)
    data = json.loads(json.dumps(results_dict(report)))
    assert data["passed"] is False
    assert data["stability"]["growth_rate_per_s"] == pytest.approx(sigma, rel=1e-9)
    assert data["stability"]["doubling_time_s"] == pytest.approx(math.log(2) / sigma, rel=1e-9)
    row = next(r for r in data["modes"] if r["kind"] == "unstable")
    assert row["natural_frequency_hz"] is None and row["growth_rate_per_s"] == pytest.approx(sigma)
    assert {"natural_frequency_hz", "damping_ratio", "shape"} <= set(row)
    html = render_calc(report, project(THEME_ONLY_ROOT), build_date="2024-05-01").html
    assert "growth rate" in html and "doubling" in html and "divergent" in html


def test_unstable_mode_frequency_query_refuses_clearly(tmp_path):
    text = cart_calc().replace('"dot(th)" = "0 rad/s"',
                               '"dot(th)" = "0 rad/s"\n\n[[result]]\nname = "f2"\nexpr = "natural_frequency(2)"\nunit = "Hz"')
    report = report_of(tmp_path, text)
    detail = next(c.detail for c in report.checks if c.name == "f2")
    assert "natural_frequency(2) is not defined: mode 2 is unstable" in detail
    assert "growth rate 4.52 1/s" in detail


def test_expected_instability_passes_and_check_prints_unstable(tmp_path, capsys):
    root = tmp_path / "p"
    (root / "calcs").mkdir(parents=True)
    (root / "project.toml").write_text('[project]\nnumber = "P-1"\nname = "modes"\n')
    (root / "calcs" / "u1.toml").write_text(cart_calc())
    (root / "calcs" / "u2.toml").write_text(
        cart_calc("\n[analysis]\nexpect_unstable = true\n").replace('"U-1"', '"U-2"'))
    code = check_command(root)
    out = capsys.readouterr()
    assert code == 1
    assert "u1.toml: unstable: growth rate 4.52 1/s, doubling time 0.1534 s\n" in out.out
    assert ("u2.toml: unstable: growth rate 4.52 1/s, doubling time 0.1534 s "
            "(expected: [analysis] expect_unstable = true)") in out.out
    assert "PASS  U-2" in out.out and "FAIL  U-1" in out.out


def test_expecting_instability_of_a_stable_system_fails(tmp_path):
    text = calc("""
    [parameters]
    m = "1 kg"
    k = "100 N/m"
    [coordinates]
    x = { unit = "m" }
    [energy]
    kinetic = "m/2*dot(x)**2"
    potential = "k/2*x**2"
    [initial]
    x = "0 m"
    "dot(x)" = "0 m/s"
    [analysis]
    expect_unstable = true
    """)
    report = report_of(tmp_path, text)
    failed = [c for c in report.checks if not c.passed]
    assert [c.kind for c in failed] == ["stability"]
    assert "expects an unstable equilibrium but found stable" in failed[0].detail


def test_expect_unstable_must_be_a_boolean(tmp_path):
    path = write_calc(tmp_path, cart_calc('\n[analysis]\nexpect_unstable = "yes"\n'))
    with pytest.raises(ProblemList) as info:
        load_calc(path)
    text = str(info.value)
    assert "analysis.expect_unstable" in text and "must be true or false" in text
    assert "write expect_unstable = true or expect_unstable = false" in text


# --------------------------------------------------------------------------------------
# Item 5: modes of non-classical damping; complex gyroscopic shapes
# --------------------------------------------------------------------------------------
DASH = dict(m1=10.0, m2=0.1, k1=2000.0, k2=2000.0, c=2000.0)


def dashpot_report(tmp_path):
    return report_of(tmp_path, calc(f"""
    [parameters]
    m1 = "{DASH['m1']} kg"
    m2 = "{DASH['m2']} kg"
    k1 = "{DASH['k1']} N/m"
    k2 = "{DASH['k2']} N/m"
    c = "{DASH['c']} N*s/m"

    [coordinates]
    x1 = {{ unit = "m" }}
    x2 = {{ unit = "m" }}

    [energy]
    kinetic = "m1/2*dot(x1)**2 + m2/2*dot(x2)**2"
    potential = "k1/2*x1**2 + k2/2*(x2 - x1)**2"
    dissipation = "c/2*dot(x2)**2"

    [initial]
    x1 = "0 m"
    x2 = "0 m"
    "dot(x1)" = "0 m/s"
    "dot(x2)" = "0 m/s"

    [[result]]
    name = "fn1"
    expr = "natural_frequency(1)"
    unit = "Hz"

    [[result]]
    name = "z1"
    expr = "damping_ratio(1)"

    [[result]]
    name = "fd1"
    expr = "damped_frequency(1)"
    unit = "Hz"
    """, "D-1", "heavy dashpot on a light mass"))


def test_non_classical_damping_takes_every_column_from_the_same_root(tmp_path):
    """Regression: the undamped frequency was paired with another root's ζ.  Roots by
    scipy.linalg.eig of the state matrix of M = diag(m1, m2), C = diag(0, c),
    K = [[k1 + k2, −k2], [−k2, k2]]; ω_n = |λ|, ζ = −Re λ/|λ|, ω_d = Im λ."""
    report = dashpot_report(tmp_path)
    assert report.passed, [c for c in report.checks if not c.passed]
    d = DASH
    s = state_roots(np.diag([d["m1"], d["m2"]]), np.diag([0.0, d["c"]]),
                    np.array([[d["k1"] + d["k2"], -d["k2"]], [-d["k2"], d["k2"]]]))
    osc = next(r for r in s if r.imag > 1e-6)
    real = sorted(r.real for r in s if abs(r.imag) <= 1e-6)
    first, second = report.modes
    assert first.kind == "oscillatory"
    assert result(report, "fn1") == pytest.approx(abs(osc) / (2 * math.pi), rel=1e-9)
    assert result(report, "z1") == pytest.approx(-osc.real / abs(osc), rel=1e-9)
    assert result(report, "fd1") == pytest.approx(osc.imag / (2 * math.pi), rel=1e-9)
    # the undamped frequencies (K φ = ω² M φ) are not what the table reports
    undamped = np.sqrt(sla.eigh(report.linearisation.K, report.linearisation.M, eigvals_only=True))
    assert min(abs(undamped - abs(osc))) > 0.1 * abs(osc)
    assert second.kind == "overdamped"
    assert sorted(re for re, _ in second.roots) == pytest.approx(real, rel=1e-9)
    assert second.natural_frequency_rad_s == pytest.approx(math.sqrt(real[0] * real[1]), rel=1e-9)
    assert first.shape_magnitude is not None                       # non-classical: complex shape
    html = render_calc(report, project(THEME_ONLY_ROOT), build_date="2024-05-01").html
    assert "all its columns come from that root" in html and "overdamped" in html


def test_classical_damping_roots_match_scipy_and_shapes_stay_real(tmp_path):
    """C = a M + b K (Rayleigh damping) keeps real modes (Caughey and O'Kelly's condition);
    every mode's roots must equal scipy.linalg.eig's of the state matrix."""
    m, k, a, b = 2.0, 800.0, 0.5, 0.002          # C = a M + b K: coefficients a m and b k
    report = report_of(tmp_path, calc(f"""
    [parameters]
    m = "{m} kg"
    k = "{k} N/m"
    ca = "{a * m} N*s/m"
    cb = "{b * k} N*s/m"
    [coordinates]
    x1 = {{ unit = "m" }}
    x2 = {{ unit = "m" }}
    [energy]
    kinetic = "m/2*(dot(x1)**2 + dot(x2)**2)"
    potential = "k/2*(x1**2 + (x2 - x1)**2 + x2**2)"
    dissipation = "ca/2*(dot(x1)**2 + dot(x2)**2) + cb/2*(dot(x1)**2 + (dot(x2) - dot(x1))**2 + dot(x2)**2)"
    [initial]
    x1 = "0 m"
    x2 = "0 m"
    "dot(x1)" = "0 m/s"
    "dot(x2)" = "0 m/s"
    """))
    Mm = np.diag([m, m])
    K = np.array([[2 * k, -k], [-k, 2 * k]])
    s = state_roots(Mm, a * Mm + b * K, K)
    assert report.modes, str(report.error)
    ours = np.array(sorted((complex(re, im) for md in report.modes for re, im in md.roots),
                           key=lambda z: (z.imag, z.real)))
    theirs = np.array(sorted(s, key=lambda z: (z.imag, z.real)))
    assert np.max(np.abs(ours - theirs)) <= 1e-9 * np.max(np.abs(theirs))
    for md in report.modes:
        assert md.shape_magnitude is None
        lam = complex(*md.roots[0])
        assert md.damping_ratio == pytest.approx(-lam.real / abs(lam), rel=1e-10)


GYRO = dict(m=1.0, kx=400.0, ky=900.0, W=5.0)


def test_gyroscopic_shapes_keep_the_out_of_phase_component(tmp_path):
    """Regression: shapes were {x: 1, y: 0}.  In the rotating frame, at s = iω,
    (kx − mW² − mω²) X = 2 i m W ω Y, so |Y/X| = |kx − mW² − mω²|/(2 m W ω) at ±90°
    (by hand from the equations; ω checked by scipy.linalg.eig of the state matrix with
    G = [[0, −2mW], [2mW, 0]], K = diag(kx − mW², ky − mW²))."""
    g = GYRO
    report = report_of(tmp_path, calc(f"""
    [parameters]
    m = "{g['m']} kg"
    kx = "{g['kx']} N/m"
    ky = "{g['ky']} N/m"
    W = "{g['W']} rad/s"
    [coordinates]
    x = {{ unit = "m" }}
    y = {{ unit = "m" }}
    [energy]
    kinetic = "m/2*((dot(x) - W*y)**2 + (dot(y) + W*x)**2)"
    potential = "kx/2*x**2 + ky/2*y**2"
    [initial]
    x = "0 m"
    y = "0 m"
    "dot(x)" = "0 m/s"
    "dot(y)" = "0 m/s"
    """, "G-1", "mass in a rotating frame"))
    assert report.passed, [c for c in report.checks if not c.passed]
    m, W = g["m"], g["W"]
    s = state_roots(np.eye(2) * m, np.array([[0.0, -2 * m * W], [2 * m * W, 0.0]]),
                    np.diag([g["kx"] - m * W * W, g["ky"] - m * W * W]))
    omegas = sorted(r.imag for r in s if r.imag > 0)
    assert [md.natural_frequency_rad_s for md in report.modes] == pytest.approx(omegas, rel=1e-10)
    first = report.modes[0]
    w = first.natural_frequency_rad_s
    ratio = abs(g["kx"] - m * W * W - m * w * w) / (2 * m * W * w)
    assert first.shape_magnitude["x"] == pytest.approx(1.0)
    assert first.shape_magnitude["y"] == pytest.approx(ratio, rel=1e-8)
    assert abs(first.shape_phase_deg["y"]) == pytest.approx(90.0, abs=1e-6)
    data = json.loads(json.dumps(results_dict(report)))
    row = data["modes"][0]
    assert row["shape_complex"] is True and isinstance(row["shape"]["y"], float)
    assert row["shape_magnitude"]["y"] == pytest.approx(ratio, rel=1e-8)
    html = render_calc(report, project(THEME_ONLY_ROOT), build_date="2024-05-01").html
    assert "∠" in html and "magnitude ∠ phase" in html


def test_steady_drive_without_a_relative_equilibrium_is_refused(tmp_path):
    """A belt driven at constant speed drags a free block through a damper against a constant
    force: no position of the block balances c v + F (by hand), so rather than drop the belt
    speed the equilibrium is refused with the prescribed velocity named."""
    report = report_of(tmp_path, calc("""
    [parameters]
    m = "2 kg"
    mb = "1 kg"
    c = "50 N*s/m"
    v = "0.5 m/s"
    F = "10 N"
    [coordinates]
    x = { unit = "m" }
    s = { unit = "m" }
    [energy]
    kinetic = "m/2*dot(x)**2 + mb/2*dot(s)**2"
    dissipation = "c/2*(dot(x) - dot(s))**2"
    [generalized_forces]
    x = "F"
    [[constraint]]
    name = "F_belt"
    equation = "s - v*t"
    unit = "N"
    [initial]
    x = "0 m"
    s = "0 m"
    "dot(x)" = "0 m/s"
    "dot(s)" = "0.5 m/s"
    """))
    failed = [c for c in report.checks if not c.passed]
    assert [c.kind for c in failed] == ["equilibrium"]
    assert "no steady motion (relative equilibrium) was found" in failed[0].detail
    assert "dot(s) = 0.5 (SI)" in failed[0].detail and "equilibrium = false" in failed[0].detail
    assert report.equilibrium is None
