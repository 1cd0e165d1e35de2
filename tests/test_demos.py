"""The demo projects, built end to end: every calc passes, key values match closed forms.

Each project is copied to a temporary folder and built once with
commands.build.build(project, out_dir=...); the assertions read the
results.json written beside each calc page.  Closed forms below are computed
here from the calc's own parameters (loaded with the calc-file loader) and
name their published source.
"""

from __future__ import annotations

import io
import json
import math
import shutil
from pathlib import Path

import numpy as np
import pytest
from scipy.special import ellipk

from calcsheaf.calcfile.loader import load_calc
from calcsheaf.commands.build import build

PROJECTS = Path(__file__).resolve().parents[1] / "projects"
EXPECTED = {
    "stage-machinery": {"C-101", "C-102", "C-103", "C-104"},
    "plant-room": {"C-201", "C-202", "C-203"},
}


@pytest.fixture(scope="module", params=sorted(EXPECTED))
def built(request, tmp_path_factory):
    """(project name, {calc number: results.json dict}, {calc number: SI parameters})."""
    name = request.param
    work = tmp_path_factory.mktemp(name)
    project = work / name
    shutil.copytree(PROJECTS / name, project, ignore=shutil.ignore_patterns("_site", ".calcsheaf-cache"))
    site = work / "site"
    out = io.StringIO()
    rc = build(project, out_dir=site, out=out, err=out)
    assert rc == 0, out.getvalue()
    results = {p.parent.name: json.loads(p.read_text()) for p in sorted(site.glob("*/results.json"))}
    params = {}
    for path in sorted((project / "calcs").glob("*.toml")):
        spec = load_calc(path)
        params[spec.number] = spec.parameter_values
    return name, results, params


def test_every_calc_is_built_and_passes(built):
    name, results, _ = built
    assert set(results) == EXPECTED[name]
    for number, data in results.items():
        assert data["passed"] is True, number
        assert data["calc"]["number"] == number
        assert data["energy_audit"]["pass"] is True, number
        assert data["energy_audit"]["max_relative_residual"] <= data["energy_audit"]["tolerance"]
        assert data["criteria"], f"{number} has no criteria"
        for c in data["criteria"]:
            assert c["pass"] and c["ratio"] <= 1.0, (number, c["name"])


def test_every_crosscheck_agrees_within_its_tolerance(built):
    _, results, _ = built
    for number, data in results.items():
        assert data["crosschecks"], f"{number} has no crosscheck"
        for x in data["crosschecks"]:
            error = abs(x["computed"] - x["handbook"]) / max(abs(x["handbook"]), 1e-300)
            assert x["pass"] and error <= x["tolerance"], (number, x["case"], x["quantity"])
            assert x["source"], (number, x["case"])
            for limit in x["validity"]:
                assert limit["holds"], (number, x["case"], limit["limit"])


def _value(data, name):
    return data["results"][name]["value"]


def test_key_values_against_closed_forms(built):
    name, results, params = built
    checks = CLOSED_FORMS[name]
    for number, check in checks.items():
        check(results[number], params[number])


# ---- stage-machinery ---------------------------------------------------------

def _c101(data, p):
    # Atwood machine with sheave inertia: a = (m1 - m2) g / (m1 + m2 + I/r^2), T1 = m1 (g - a);
    # J. L. Meriam and L. G. Kraige, Engineering Mechanics: Dynamics, 7th ed., chapter 6 (from memory).
    a = (p["m1"] - p["m2"]) * p["g"] / (p["m1"] + p["m2"] + p["I_s"] / p["r_s"] ** 2)
    assert data["results"]["a_batten"]["unit"] == "m/s^2"
    assert _value(data, "a_batten") == pytest.approx(a, rel=1e-9)
    assert _value(data, "v_react") == pytest.approx(-a * p["t_react"], rel=1e-7)
    line = next(c for c in data["criteria"] if c["name"].startswith("lift-line"))
    assert line["unit"] == "kN"
    assert line["demand"] * 1e3 == pytest.approx(p["m1"] * (p["g"] - a) / p["n_lines"], rel=1e-7)


def _c102(data, p):
    # Period at any amplitude T = 4 sqrt(L/g) K(k), k = sin(theta0/2): L. D. Landau and
    # E. M. Lifshitz, Mechanics, 3rd ed., section 11, problem 1; scipy's ellipk takes m = k^2.
    k = math.sin(p["theta0"] / 2)
    period = 4 * math.sqrt(p["L"] / p["g"]) * ellipk(k * k)
    assert _value(data, "T_swing") == pytest.approx(period, rel=1e-6)
    # Largest tension at the bottom, m g (3 - 2 cos theta0), by energy conservation (same source).
    assert _value(data, "T_max") * 1e3 == pytest.approx(
        p["m"] * p["g"] * (3 - 2 * math.cos(p["theta0"])), rel=1e-5)
    # Small-swing period 2 pi sqrt(L/g); the 45 degree swing is longer by about 4 %.
    small = 2 * math.pi * math.sqrt(p["L"] / p["g"])
    assert _value(data, "T_small") == pytest.approx(small, rel=1e-9)
    assert 1.03 < _value(data, "T_swing") / small < 1.05


def _c103(data, p):
    # Static deflection delta = m g / k and f_n = sqrt(g/delta) / (2 pi):
    # S. S. Rao, Mechanical Vibrations, 6th ed., section 2.2.
    delta = p["m"] * p["g"] / p["k"]
    assert _value(data, "z_rest") * 1e-3 == pytest.approx(-delta, rel=1e-8)
    assert _value(data, "f1") == pytest.approx(math.sqrt(p["g"] / delta) / (2 * math.pi), rel=1e-9)
    # Energy bound on the compression: with no damping the lowest point solves
    # k z^2/2 + m g z = -m v0^2/2 below the free position; the square-law damper must do better.
    undamped = (-p["m"] * p["g"] - math.sqrt((p["m"] * p["g"]) ** 2 + p["k"] * p["m"] * p["v0"] ** 2)) / p["k"]
    assert undamped < _value(data, "z_min") * 1e-3 < -delta


def _c104(data, p):
    # Collar released on an arm turning at constant speed: r = r0 cosh(Omega t),
    # dr/dt = r0 Omega sinh(Omega t); J. L. Meriam and L. G. Kraige, Engineering Mechanics:
    # Dynamics, 7th ed., section 3/5 (from memory). At the end stop r = L, so dr/dt = Omega sqrt(L^2 - r0^2).
    w, r0, L = p["Omega"], p["r0"], p["L_track"]
    assert _value(data, "t_stop") == pytest.approx(math.acosh(L / r0) / w, rel=1e-12)
    assert _value(data, "v_stop") == pytest.approx(w * math.sqrt(L * L - r0 * r0), rel=1e-7)
    energy = next(c for c in data["criteria"] if c["name"] == "end-stop buffer energy")
    assert energy["demand"] == pytest.approx(p["m"] / 2 * w * w * (L * L - r0 * r0), rel=1e-6)


# ---- plant-room ------------------------------------------------------------------

def _c201(data, p):
    # f_n = sqrt(k/m)/(2 pi), zeta = c / (2 sqrt(k m)): S. S. Rao, Mechanical Vibrations, 6th ed.,
    # sections 2.2 and 2.6; force transmissibility sqrt((1 + (2 zeta r)^2) / ((1 - r^2)^2 + (2 zeta r)^2)),
    # same book, section 9.10.
    m, k, c = p["m"], p["k"], p["c"]
    zeta = c / (2 * math.sqrt(k * m))
    r = p["Omega"] / math.sqrt(k / m)
    tr = math.sqrt((1 + (2 * zeta * r) ** 2) / ((1 - r * r) ** 2 + (2 * zeta * r) ** 2))
    assert _value(data, "f1") == pytest.approx(math.sqrt(k / m) / (2 * math.pi), rel=1e-9)
    assert _value(data, "zeta1") == pytest.approx(zeta, rel=1e-9)
    assert _value(data, "TR") == pytest.approx(tr, rel=1e-9)
    assert data["modes"][0]["natural_frequency_hz"] == pytest.approx(_value(data, "f1"), rel=1e-12)


def _c202(data, p):
    # Two-degree-of-freedom chain: det(K - w^2 M) = 0, S. S. Rao, Mechanical Vibrations, 6th ed.,
    # section 5.3; solved here as the eigenvalues of M^-1 K.
    K = np.array([[p["k1"] + p["k2"], -p["k2"]], [-p["k2"], p["k2"] + p["k3"]]])
    M = np.diag([p["m1"], p["m2"]])
    f = np.sort(np.sqrt(np.linalg.eigvals(np.linalg.solve(M, K)).real)) / (2 * math.pi)
    assert [_value(data, "f1"), _value(data, "f2")] == pytest.approx(list(f), rel=1e-9)
    # Joukowsky step force rho a dv A: E. B. Wylie and V. L. Streeter, Fluid Transients in
    # Systems, 1993, chapter 1.
    step = p["rho_w"] * p["a_w"] * p["dv"] * p["A_pipe"]
    assert _value(data, "F_step") * 1e3 == pytest.approx(step, rel=1e-12)
    # A suddenly applied, held force on a lightly damped system: peak response below twice the
    # static one (Rao, section 4.6, dynamic load factor 2 when undamped), well above the static one.
    share = step * p["k1"] * p["k2"] / (p["k1"] * p["k2"] + p["k1"] * p["k3"] + p["k2"] * p["k3"])
    brace = next(c for c in data["criteria"] if c["name"].startswith("bracing"))
    assert 1.5 * share < brace["demand"] * 1e3 < 2.2 * share


def _c203(data, p):
    # Radial equation on an arm turning at Omega: m (r'' - r Omega^2) = -k (r - r_s) - c r';
    # J. L. Meriam and L. G. Kraige, Engineering Mechanics: Dynamics, 7th ed., section 3/5
    # (radial acceleration). Rest radius k r_s / (k - m Omega^2), frequency sqrt((k - m Omega^2)/m).
    m, k, w = p["m"], p["k"], p["Omega"]
    assert _value(data, "r_eq") * 1e-3 == pytest.approx(k * p["r_s"] / (k - m * w * w), rel=1e-9)
    assert _value(data, "f1") == pytest.approx(math.sqrt((k - m * w * w) / m) / (2 * math.pi), rel=1e-9)


CLOSED_FORMS = {
    "stage-machinery": {"C-101": _c101, "C-102": _c102, "C-103": _c103, "C-104": _c104},
    "plant-room": {"C-201": _c201, "C-202": _c202, "C-203": _c203},
}
