"""Hand-built CalcReport fixtures for the render tests (no analysis pipeline needed).

The arrays are smooth made-up signals: the render tests check layout and
formatting, never the physics, so no value here is a published result.
"""

from __future__ import annotations

import functools
from pathlib import Path

import numpy as np
import sympy as sp

from calcsheaf.model import (
    Assumption, CalcReport, Check, CoordinateRow, CriterionRow, CrosscheckRow, EnergyAudit,
    Equilibrium, FrequencyResponse, InputRow, Linearisation, Mode, OutputSummary, PackageModel,
    ProjectInfo, Reference, ResultValue, Series, SolverRun, Step, TimeHistory,
)
from calcsheaf.render.symbols import name_latex

SOURCE_TOML = """[calc]
number = "C-201"
title = "Cart with hanging pendulum: release transient"
"""

z, theta = sp.Symbol("z"), sp.Symbol("theta")
dz, dtheta = sp.Symbol("dot(z)"), sp.Symbol("dot(theta)")
ddz, ddtheta = sp.Symbol("ddot(z)"), sp.Symbol("ddot(theta)")
m, M, l, k, c, g = sp.symbols("m M l k c g")
T = (M + m) / 2 * dz**2 + m * l * dz * dtheta * sp.cos(theta) + m * l**2 / 2 * dtheta**2
V = k / 2 * z**2 - m * g * l * sp.cos(theta)
R = c / 2 * dz**2
L = T - V


def project(root: Path, paper: str = "A4") -> ProjectInfo:
    return ProjectInfo(number="P-9001", name="Test rig hall", root=root,
                       client="Invented Client", site="Test site", paper=paper)


def _derivation(extra: int = 0) -> tuple[Step, ...]:
    steps = [Step("Kinetic energy", "T", T), Step("Potential energy", "V", V),
             Step("Rayleigh dissipation function", "R", R), Step("Lagrangian", "L", L)]
    for q, dq in ((z, dz), (theta, dtheta)):
        steps.append(Step("Momentum", rf"\frac{{\partial L}}{{\partial {name_latex(dq.name)}}}",
                          sp.diff(L, dq), q.name))
        steps.append(Step("Generalised force of the potential",
                          rf"\frac{{\partial L}}{{\partial {name_latex(q.name)}}}",
                          sp.diff(L, q), q.name))
    steps.append(Step("Mass matrix", "M(q)", sp.hessian(T, (dz, dtheta))))
    long = sp.expand((sp.diff(L, dz) + sp.diff(L, dtheta)) * (z + theta + l) ** 2)
    for index in range(extra):
        steps.append(Step(f"Expanded check term {index + 1}", f"E_{{{index + 1}}}", long))
    return tuple(steps)


def _equations() -> tuple[Step, ...]:
    eq_z = ((M + m) * ddz + m * l * (ddtheta * sp.cos(theta) - dtheta**2 * sp.sin(theta))
            + c * dz + k * z)
    eq_t = m * l**2 * ddtheta + m * l * ddz * sp.cos(theta) + m * g * l * sp.sin(theta)
    return (Step("Equation of motion", "Q_{z}", eq_z, "z"),
            Step("Equation of motion", r"Q_{\theta}", sp.Eq(eq_t, 0), "theta"))


def _time_history() -> TimeHistory:
    t = np.linspace(0.0, 4.0, 801)
    run = SolverRun("DOP853", True, 0, "The solver successfully reached the end.", 2210)
    other = SolverRun("Radau", True, 0, "The solver successfully reached the end.", 1844)
    series = (Series("z", 0.02 * np.exp(-0.3 * t) * np.cos(6.0 * t), "m", "cart position"),
              Series("theta", 0.1 * np.cos(3.1 * t), "rad", "pendulum angle"),
              Series("F_k", 1.2 + 0.4 * np.sin(6.0 * t), "kN", "spring force", "output"))
    return TimeHistory(t, series, run, other, 3.2e-8, 1e-6)


def _energy() -> EnergyAudit:
    t = np.linspace(0.0, 4.0, 801)
    dissipated = 0.5 * (1 - np.exp(-0.6 * t))
    h = 2.0 - dissipated
    return EnergyAudit(t, h, 0.5 + 0 * t, h - 0.5, dissipated, 0 * t, 1e-10 * np.sin(t),
                       4.1e-9, 1e-6, True, True, ("Checked against the 2R identity.",))


def _frequency() -> FrequencyResponse:
    f = np.linspace(0.5, 5.0, 200)
    amp = 1e-3 / np.sqrt((1 - (f / 1.2) ** 2) ** 2 + (0.1 * f / 1.2) ** 2)
    phase = -np.degrees(np.arctan2(0.1 * f / 1.2, 1 - (f / 1.2) ** 2))
    return FrequencyResponse(f, {"z": amp, "theta": 3 * amp}, {"z": phase, "theta": phase},
                             {"z": "m", "theta": "rad"}, {"z": "F_0"})


def report(number: str = "C-201", *, status: str = "draft", extra_steps: int = 0,
           hazards: tuple[str, ...] = ("suspended_load",)) -> CalcReport:
    """A complete analysed calc; `extra_steps` lengthens the derivation (for page counts)."""
    return CalcReport(
        number=number, title="Cart with hanging pendulum: release transient",
        source_path=Path(f"calcs/{number}.toml"), source_text=SOURCE_TOML,
        input_hash="ab" * 32, revision="B", status=status,
        purpose="Find the **peak spring force** when the pendulum is released.\n\n"
                "<script>alert('x')</script> Scope: planar motion only.",
        assumptions=(Assumption("A1", "Cart runs on frictionless rails.", "Rollers on bearings."),
                     Assumption("A2", "Rope is *rigid*.", "", open=True)),
        references=(Reference("R1", "Invented handbook of vibration, 2nd ed., section 3.1"),),
        inputs=(InputRow("m", "12 kg", 12.0, "kg", "R1", "bob"),
                InputRow("M", "40 kg", 40.0, "kg", "A1"),
                InputRow("l", "1.5 m", 1.5, "m"),
                InputRow("k", "20 kN/m", 20000.0, "N/m", "", "two springs"),
                InputRow("c", "150 N*s/m", 150.0, "N*s/m"),
                InputRow("g", "9.80665 m/s^2", 9.80665, "m/s^2")),
        coordinates=(CoordinateRow("z", "m", "cart position"),
                     CoordinateRow("theta", "rad", "pendulum angle from vertical")),
        derivation=_derivation(extra_steps), equations=_equations(),
        equilibrium=Equilibrium({"z": 0.0, "theta": 0.0}, {"z": "m", "theta": "rad"}, True,
                                "stable: stiffness positive definite", 1.2e-14),
        linearisation=Linearisation(("z", "theta"), np.array([[52.0, 18.0], [18.0, 27.0]]),
                                    np.array([[150.0, 0.0], [0.0, 0.0]]), np.zeros((2, 2)),
                                    np.array([[20000.0, 0.0], [0.0, 176.5]]), np.zeros((2, 2))),
        modes=(Mode(1, "oscillatory", 0.41, 2.58, 0.004, 0.41, {"z": -0.05, "theta": 1.0}),
               Mode(2, "oscillatory", 3.55, 22.3, 0.031, 3.548, {"z": 1.0, "theta": -0.3})),
        frequency_response=_frequency(), time_history=_time_history(), energy=_energy(),
        outputs=(OutputSummary("F_k", "kN", "spring force", 1.6, 1.6, 0.8),),
        results=(ResultValue("f_1", "natural_frequency(1)", 0.41, "Hz",
                             "first natural frequency"),),
        criteria=(CriterionRow("spring force within rating", "peak(F_k)", "F_rated", 1.6, 2.5,
                               "kN", 0.64, True, "R1"),),
        crosschecks=(CrosscheckRow("sdof_viscous", "Single mass on spring and damper",
                                   "natural_frequency_hz",
                                   r"f_n = \frac{1}{2\pi}\sqrt{\frac{k}{m}}",
                                   3.55, 3.5500001, 2.8e-8, 1e-6, "eigen-solver round-off", True,
                                   "Invented textbook, eq. 2.1", (("zeta < 1", True),)),),
        checks=(Check("equilibrium", "residual below tolerance", True, "1.2e-14"),
                Check("energy", "energy balance", True, "4.1e-9 <= 1e-6"),
                Check("criterion", "spring force within rating", True, "D/C 0.64")),
        hazards=hazards, software={"calcsheaf": "0.1.0", "numpy": np.__version__,
                                   "sympy": sp.__version__},
    )


def failed_report(number: str = "C-666") -> CalcReport:
    from calcsheaf.errors import DerivationError
    return CalcReport(number=number, title="Broken calc", source_path=Path(f"calcs/{number}.toml"),
                      source_text="[calc]\n", input_hash="cd" * 32,
                      error=DerivationError("mass matrix is singular", file=f"calcs/{number}.toml",
                                            line=12, key="energy.kinetic",
                                            fix="give every coordinate a mass or inertia"))


def package(root: Path, calcs: list[CalcReport], paper: str = "A4") -> PackageModel:
    return PackageModel(project(root, paper), calcs, {"calcsheaf": "0.1.0"}, "2024-05-01")


# A project root without a templates/ folder: pages use the default theme only.
THEME_ONLY_ROOT = Path("/nonexistent/calcsheaf-render-tests")
BUILD_DATE = "2024-05-01"


@functools.cache
def standard_page():
    """The rendered page of `report()`, shared by the test modules (render once)."""
    from calcsheaf.render.html import render_calc
    return render_calc(report(), project(THEME_ONLY_ROOT), build_date=BUILD_DATE)
