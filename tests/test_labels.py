"""Numbers as labelled: every number shown or written is in the unit printed beside it.

References beside each check: statics of a rope wound on a drum (moment m g r), the
steady response of a harmonically driven damped oscillator X = (M0/k) / sqrt((1 - r^2)^2
+ (2 zeta r)^2) evaluated with numpy (S. S. Rao, Mechanical Vibrations, 6th ed.,
harmonically excited vibration; the formula is what is relied on), and pdftotext for
what each PDF sheet carries.
"""

from __future__ import annotations

import json
import math
import shutil
import subprocess

import numpy as np
import pytest

from calcsheaf.model import ProjectInfo
from calcsheaf.render import plots
from calcsheaf.render.cautions import HAZARD_MARKS
from calcsheaf.render.html import render_calc
from calcsheaf.render.json import results_json

from helpers_calc import report_of
from test_render_fixtures import failed_report, project, standard_page

G = 9.80665
DRUM = dict(m=30.0, r=0.2, kt=900.0, J=0.5)


def drum_calc(equation: str, unit: str = "") -> str:
    """A load m hanging on a rope wound on a drum (radius r, inertia J) held by a torsional
    spring kt; the rope is a constraint between the load height y and the drum angle phi."""
    unit_line = f'unit = "{unit}"\n' if unit else ""
    return f"""
[calc]
number = "L-1"
title = "rope on a sprung drum"

[parameters]
m = "{DRUM['m']} kg"
r = "{DRUM['r']} m"
kt = "{DRUM['kt']} N*m/rad"
J = "{DRUM['J']} kg*m^2"
g = "{G} m/s^2"

[coordinates]
y = {{ unit = "mm", label = "load height" }}
phi = {{ unit = "deg", label = "drum angle" }}

[energy]
kinetic = "m/2*dot(y)**2 + J/2*dot(phi)**2"
potential = "m*g*y + kt/2*phi**2"

[[constraint]]
name = "R"
equation = "{equation}"
{unit_line}
[initial]
y = "0 m"
phi = "0 rad"
"dot(y)" = "0 m/s"
"dot(phi)" = "0 rad/s"
"""


def test_angle_constraint_moment_is_newton_metres_at_rest(tmp_path):
    report = report_of(tmp_path, drum_calc("phi + y/r"))
    assert report.error is None, report.error
    eq = report.equilibrium
    # statics: the rope holds the load, so the constraint (on an angle) carries the
    # moment m g r about the drum axis; its default unit is N*m, not J
    assert eq.multiplier_units == {"R": "N*m"}
    assert eq.multipliers["R"] == pytest.approx(DRUM["m"] * G * DRUM["r"], rel=1e-9)
    data = json.loads(results_json(report))
    assert data["constraint_forces_at_rest"] == {
        "R": {"value": pytest.approx(DRUM["m"] * G * DRUM["r"], rel=1e-9), "unit": "N*m"}}
    page = render_calc(report, ProjectInfo(number="P-1", name="p", root=tmp_path))
    section = page.html.split('id="equilibrium"')[1].split("</section>")[0]
    assert "Force (SI)" not in section
    assert "<th>Unit</th>" in section and "N·m" in section


def test_rest_force_shown_and_written_in_its_declared_unit(tmp_path):
    report = report_of(tmp_path, drum_calc("y + r*phi", unit="kN"))
    eq = report.equilibrium
    # statics: rope tension m g, shown in kN because the constraint declares kN
    assert eq.multiplier_units == {"R": "kN"}
    assert eq.multipliers["R"] == pytest.approx(DRUM["m"] * G / 1000, rel=1e-9)
    data = json.loads(results_json(report))
    assert data["constraint_forces_at_rest"]["R"]["unit"] == "kN"
    assert data["constraint_forces_at_rest"]["R"]["value"] == pytest.approx(DRUM["m"] * G / 1000, rel=1e-9)
    # the rest angle: kt phi = m g r
    assert eq.values["phi"] == pytest.approx(math.degrees(DRUM["m"] * G * DRUM["r"] / DRUM["kt"]), rel=1e-9)


TORSION = dict(J=0.02, kt=500.0, ct=0.4, M0=2.0)

TORSION_CALC = f"""
[calc]
number = "L-2"
title = "driven torsional oscillator"

[parameters]
w = "10 rad/s"
J = "{TORSION['J']} kg*m^2"
kt = "{TORSION['kt']} N*m/rad"
ct = "{TORSION['ct']} N*m*s/rad"
M0 = "{TORSION['M0']} N*m"

[coordinates]
theta = {{ unit = "deg", label = "disc angle" }}

[energy]
kinetic = "J/2*dot(theta)**2"
potential = "kt/2*theta**2"
dissipation = "ct/2*dot(theta)**2"

[initial]
theta = "0 rad"
"dot(theta)" = "0 rad/s"

[frequency_response]
force = {{ theta = "M0" }}
from = "5 Hz"
to = "40 Hz"
points = 141

[[output]]
name = "M_k"
expr = "kt*theta"
unit = "N*m"

[[output]]
name = "sq"
expr = "theta**2"

[[output]]
name = "drive"
expr = "M0*sin(w*t)"
unit = "N*m"

[[result]]
name = "f1"
expr = "natural_frequency(1)"

[[result]]
name = "w1"
expr = "2*pi*natural_frequency(1)"

[[result]]
name = "decay"
expr = "ct/J"

[[criterion]]
name = "first mode above the drive"
demand = "w/(2*pi)"
capacity = "f1"
"""


@pytest.fixture(scope="module")
def torsion(tmp_path_factory):
    return report_of(tmp_path_factory.mktemp("torsion"), TORSION_CALC)


def _closed_form_deg(f_hz):
    J, kt, ct, M0 = (TORSION[n] for n in ("J", "kt", "ct", "M0"))
    wn, zeta = math.sqrt(kt / J), ct / (2 * math.sqrt(kt * J))
    r = 2 * np.pi * np.asarray(f_hz) / wn
    return np.degrees((M0 / kt) / np.hypot(1 - r ** 2, 2 * zeta * r)), wn, zeta


def test_frequency_response_in_display_units(torsion):
    assert torsion.passed, [c for c in torsion.checks if not c.passed]
    fr = torsion.frequency_response
    assert fr.units["theta"] == "deg" and fr.units["M_k"] == "N*m"
    expected, wn, zeta = _closed_form_deg(fr.frequency_hz)
    np.testing.assert_allclose(fr.amplitude["theta"], expected, rtol=1e-10)
    np.testing.assert_allclose(fr.amplitude["M_k"], TORSION["kt"] * np.radians(expected), rtol=1e-10)
    # peak of the closed form: (M0/k) / (2 zeta sqrt(1 - zeta^2)) at r = sqrt(1 - 2 zeta^2)
    peak = math.degrees(TORSION["M0"] / TORSION["kt"] / (2 * zeta * math.sqrt(1 - zeta ** 2)))
    assert fr.peaks["theta"].amplitude == pytest.approx(peak, rel=1e-8)
    assert fr.peaks["theta"].frequency_hz == pytest.approx(
        wn * math.sqrt(1 - 2 * zeta ** 2) / (2 * math.pi), rel=1e-5)
    data = json.loads(results_json(torsion))
    assert data["frequency_response"]["peaks"]["theta"]["unit"] == "deg"
    assert data["frequency_response"]["peaks"]["theta"]["amplitude"] == pytest.approx(peak, rel=1e-8)


def test_output_that_linearises_to_zero_is_not_plotted(torsion):
    fr = torsion.frequency_response
    # d(theta^2)/d(theta) = 0 at theta = 0: no first-order response
    assert "sq" not in fr.amplitude and "zero" in fr.omitted["sq"]
    shown = [name for p in plots.frequency_response_plots(fr) for name in p.symbols]
    assert sorted(shown) == ["M_k", "theta"]
    units = {p.unit for p in plots.frequency_response_plots(fr)}
    assert units == {"deg", "N*m"}
    # an output of time has no linear response at all: listed, not plotted, no crash
    assert "drive" not in fr.amplitude and "depends on time" in fr.omitted["drive"]
    assert json.loads(results_json(torsion))["frequency_response"]["omitted"] == dict(fr.omitted)


def test_frequency_results_without_a_unit_are_hertz_not_per_second(torsion):
    units = {r.name: r.unit for r in torsion.results}
    assert units["f1"] == "Hz"
    assert units["w1"] == "rad/s"
    assert units["decay"] == "1/s"          # a rate, not a frequency
    # a criterion whose capacity is a result in Hz is shown in Hz
    (criterion,) = torsion.criteria
    assert criterion.unit == "Hz"
    # undamped natural frequency sqrt(kt/J)/(2 pi) of the closed form, drive w/(2 pi)
    f_n = math.sqrt(TORSION["kt"] / TORSION["J"]) / (2 * math.pi)
    assert criterion.capacity == pytest.approx(f_n, rel=1e-12)
    assert criterion.demand == pytest.approx(10 / (2 * math.pi), rel=1e-12)
    values = {r.name: r.value for r in torsion.results}
    # undamped natural frequency sqrt(kt/J)/(2 pi), closed form
    assert values["w1"] == pytest.approx(2 * math.pi * values["f1"], rel=1e-12)


@pytest.mark.skipif(shutil.which("pdftotext") is None, reason="pdftotext (poppler-utils) is not installed")
def test_hazard_caution_on_every_sheet_of_the_pdf():
    from calcsheaf.render.pdf import calc_pdf

    pdf = calc_pdf(standard_page(), {"C-201.toml": b"[calc]\n"})
    text = subprocess.run(["pdftotext", "-", "-"], input=pdf, capture_output=True, check=True).stdout.decode()
    sheets = text.split("\f")[:-1]
    assert len(sheets) > 3
    mark = HAZARD_MARKS["suspended_load"]
    for number, sheet in enumerate(sheets, start=1):
        flat = " ".join(sheet.split())
        assert "CAUTION Suspended load: a dropped or swinging load can kill" in flat, number
        assert "Full text under Cautions." in flat, number
    assert mark.split(";")[0] in " ".join(text.split())


def test_failed_calc_keeps_its_hazard_cautions(tmp_path):
    calc = failed_report()
    calc.hazards = ("rotating_machinery",)
    page = render_calc(calc, project(tmp_path))
    assert HAZARD_MARKS["rotating_machinery"] in page.print_html
    assert "Rotating machinery: unbalance, resonance" in page.html


def test_sheets_cite_book_edition_topic_and_never_from_memory():
    from calcsheaf.verification.handbook import CASES, table

    for case in CASES.values():
        # what the sheets print (crosscheck rows, selftest pages and calcs) is the citation
        assert "memory" not in case.source.lower(), case.key
        assert "ed.," in case.source, case.key                  # an edition is named
        assert "section" not in case.source.lower(), case.key   # no recalled section numbers
        # what was recalled is marked where the marking belongs: the docs-facing note
        assert "(from memory)" in case.source_note, case.key
        assert f"[[reference]]\nid = \"R1\"\ntext = \"{case.source}\"" in case.selftest_calc
        assert case.source_note in table.case_section(case)


def test_a_criterion_and_result_on_a_drive_moment_default_to_n_m(tmp_path):
    """An arm driven at constant speed W through the constraint phi - W t, a collar on a
    spring sliding along it: the drive moment is N·m (not J) in the criterion and in a
    result without a unit (a constraint on an angle has a moment for its force: SI
    practice writes a moment in N·m, keeping J for energy)."""
    report = report_of(tmp_path, """
        [calc]
        number = "B-04"
        title = "arm driven by a constraint; collar on a spring"
        [parameters]
        m = "0.5 kg"
        J = "0.05 kg*m^2"
        k = "200 N/m"
        r0 = "0.3 m"
        W = "12 rad/s"
        M_cap = "5 N*m"
        [coordinates]
        r = "mm"
        phi = "deg"
        [energy]
        kinetic = "m/2*(dot(r)**2 + r**2*dot(phi)**2) + J/2*dot(phi)**2"
        potential = "k/2*(r - r0)**2"
        [[constraint]]
        name = "M_drive"
        equation = "phi - W*t"
        [initial]
        r = "300 mm"
        phi = "0 deg"
        "dot(r)" = "0 m/s"
        "dot(phi)" = "12 rad/s"
        [time_history]
        duration = "1 s"
        points = 100
        [[result]]
        name = "Mmax"
        expr = "max(M_drive)"
        [[criterion]]
        name = "drive torque"
        demand = "peak(M_drive)"
        capacity = "M_cap"
        """)
    assert report.error is None, report.error
    (criterion,) = report.criteria
    assert criterion.unit == "N*m"
    (mmax,) = [r for r in report.results if r.name == "Mmax"]
    assert mmax.unit == "N*m"
    data = json.loads(results_json(report))
    assert data["results"]["Mmax"]["unit"] == "N*m"
