"""Crosschecks a checker can judge: inputs as written with their values, the compared
query, and the flag on comparisons that cannot fail on their own.

Reference for every value here: the closed forms of a viscously damped single-degree-of-
freedom system, f_n = sqrt(k/m) / (2 pi) and x(t) = exp(-zeta w_n t)(x0 cos w_d t + ...)
(S. S. Rao, Mechanical Vibrations, 6th ed., free vibration with viscous damping; the
formulas themselves, not the section, are what is relied on).  A crosscheck whose
handbook input is m (2 pi natural_frequency(1))^2 reproduces f_n identically, whatever
the calc computed: that identity is the reason it must not count as a pass.
"""

from __future__ import annotations

import json
import math

import pytest

from calcsheaf.render.json import results_json

from helpers_calc import check, report_of

M, K, C, X0 = 2.0, 800.0, 4.0, 0.01

BASE = f"""
[calc]
number = "X-1"
title = "crosscheck independence"

[parameters]
m = "{M} kg"
k = "{K} N/m"
c = "{C} N*s/m"
x0 = "{X0} m"

[coordinates]
x = {{ unit = "mm", label = "displacement from rest" }}

[energy]
kinetic = "m/2*dot(x)**2"
potential = "k/2*x**2"
dissipation = "c/2*dot(x)**2"

[initial]
x = "{X0 * 1000} mm"
"dot(x)" = "0 m/s"

[time_history]
duration = "0.5 s"
points = 400

[[result]]
name = "k_eff"
expr = "m*(2*pi*natural_frequency(1))**2"
unit = "N/m"
"""


def analysed(tmp_path, crosschecks: str):
    return report_of(tmp_path, BASE + crosschecks)


def crosscheck_checks(report):
    return check(report, "crosscheck")


def test_independent_crosscheck_shows_inputs_as_written_and_the_query(tmp_path):
    report = analysed(tmp_path, """
[[crosscheck]]
case = "sdof_viscous"
inputs = { m = "m", k = "k/2 + k/2", c = "c" }
compare = { natural_frequency_hz = "natural_frequency(1)" }
""")
    assert report.passed, [c for c in report.checks if not c.passed]
    (row,) = report.crosschecks
    assert row.independent and row.passed and row.dependence == ""
    assert row.query == "natural_frequency(1)"
    shown = {i.name: (i.expr, i.value, i.unit) for i in row.inputs}
    assert shown["k"] == ("k/2 + k/2", pytest.approx(K), "N/m")
    assert shown["m"] == ("m", pytest.approx(M), "kg")
    # closed form f_n = sqrt(k/m) / (2 pi) (Rao, free vibration with viscous damping)
    assert row.handbook == pytest.approx(math.sqrt(K / M) / (2 * math.pi), rel=1e-12)
    data = json.loads(results_json(report))
    (x,) = data["crosschecks"]
    assert x["query"] == "natural_frequency(1)" and x["independent"] is True
    assert x["inputs"]["k"] == {"expr": "k/2 + k/2", "value": pytest.approx(K), "unit": "N/m"}


def test_input_fed_back_from_the_compared_result_is_not_independent(tmp_path):
    report = analysed(tmp_path, """
[[crosscheck]]
case = "sdof_viscous"
inputs = { m = "m", k = "k_eff", c = "c" }
compare = { natural_frequency_hz = "natural_frequency(1)", damping_ratio = "damping_ratio(1)" }
""")
    rows = {r.quantity: r for r in report.crosschecks}
    f = rows["natural_frequency_hz"]
    # the identity: sqrt(k_eff/m)/(2 pi) = natural_frequency(1), so the error is round-off
    assert f.relative_error < 1e-12
    assert not f.independent and not f.passed
    assert "k" in f.dependence and "mode 1" in f.dependence
    # damping_ratio(1) is a query of the same mode root: also fed back
    assert not rows["damping_ratio"].independent
    assert not report.passed
    details = [c.detail for c in crosscheck_checks(report)]
    assert all(d.startswith("not independent: handbook input k is computed from mode 1") for d in details)
    data = json.loads(results_json(report))
    assert [x["independent"] for x in data["crosschecks"]] == [False, False]
    assert all(x["pass"] is False for x in data["crosschecks"]) and data["passed"] is False


def test_compared_value_that_is_the_initial_state_is_not_independent(tmp_path):
    report = analysed(tmp_path, """
[[crosscheck]]
case = "sdof_free_response"
inputs = { m = "m", k = "k", c = "c", x0 = "x0", v0 = "0", t1 = "0" }
compare = { displacement_m = "at(x, 0)" }

[[crosscheck]]
case = "sdof_free_response"
inputs = { m = "m", k = "k", c = "c", x0 = "x0", v0 = "0", t1 = "0" }
compare = { displacement_m = "max(x)" }

[[crosscheck]]
case = "sdof_free_response"
inputs = { m = "m", k = "k", c = "c", x0 = "x0", v0 = "0", t1 = "0.13" }
compare = { displacement_m = "at(x, 0.13)" }
""")
    at0, peak, later = report.crosschecks
    # x(0) = x0 and, released from rest with damping, max(x) = x0 at t = 0: equal to the
    # closed form by construction, so neither can fail
    assert at0.relative_error < 1e-9 and not at0.independent and not at0.passed
    assert "initial state" in at0.dependence
    assert not peak.independent and "initial state" in peak.dependence
    # x(0.13 s) comes from the integration: a real check (closed form of the free response)
    assert later.independent and later.passed, later
    assert not report.passed


def test_comparison_of_parameters_only_is_not_independent(tmp_path):
    """The closed form evaluated again from the parameters (here sqrt(k/m)/(2 pi), exactly
    the case's formula, and 0*natural_frequency(1) + a hand value) cannot fail whatever the
    analysis computes: flagged, and it does not count as a passed check."""
    report = analysed(tmp_path, """
[parameters.f_hand]
value = "1 Hz"

[[crosscheck]]
case = "sdof_viscous"
inputs = { m = "m", k = "k", c = "c" }
compare = { natural_frequency_hz = "sqrt(k/m)/(2*pi)", damped_frequency_hz = "0*natural_frequency(1) + f_hand" }
""")
    rows = {r.quantity: r for r in report.crosschecks}
    same = rows["natural_frequency_hz"]
    assert same.relative_error < 1e-12 and not same.independent and not same.passed
    assert "parameters only" in same.dependence
    assert not rows["damped_frequency_hz"].independent
    assert not report.passed


def test_render_shows_inputs_query_and_the_flag(tmp_path):
    from calcsheaf.render.html import render_calc
    from calcsheaf.model import ProjectInfo

    report = analysed(tmp_path, """
[[crosscheck]]
case = "sdof_viscous"
inputs = { m = "m", k = "k_eff", c = "c" }
compare = { natural_frequency_hz = "natural_frequency(1)" }
""")
    page = render_calc(report, ProjectInfo(number="P-1", name="p", root=tmp_path))
    section = page.html.split('id="crosschecks"')[1].split("</section>")[0]
    assert "k = <code>&#34;k_eff&#34;</code> = " in section or 'k = <code>"k_eff"</code> = ' in section
    assert '<code class="xc-query">natural_frequency(1)</code>' in section
    assert "Not independent: handbook input k is computed from mode 1" in section
    assert "from memory" not in page.html


def test_check_command_says_not_independent(tmp_path):
    import io

    from calcsheaf.commands.check import check as check_command

    (tmp_path / "project.toml").write_text('[project]\nnumber = "P-1"\nname = "p"\n')
    (tmp_path / "calcs").mkdir()
    (tmp_path / "calcs" / "x1.toml").write_text(BASE + """
[[crosscheck]]
case = "sdof_viscous"
inputs = { m = "m", k = "k_eff", c = "c" }
compare = { natural_frequency_hz = "natural_frequency(1)" }
""")
    out, err = io.StringIO(), io.StringIO()
    assert check_command(tmp_path, out=out, err=err) == 1
    assert ("crosscheck not independent: sdof_viscous: natural_frequency_hz = natural_frequency(1): "
            "handbook input k is computed from mode 1") in out.getvalue()
    assert out.getvalue().startswith("FAIL  X-1")
