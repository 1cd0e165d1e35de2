"""The one intermediate model: everything a writer (HTML, PDF, JSON) needs.

Commands load, derive, solve and check every calc into a `PackageModel`; only
then do writers read it.  Writers never compute: they format what is here.
All numbers are SI floats unless a field names another unit; every value that
is shown to the user carries its display unit beside it.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np


@dataclass(frozen=True)
class Person:
    """Someone who may prepare or check calcs (from project.toml [[person]])."""
    id: str
    name: str
    role: str = ""
    public_key: str = ""      # Ed25519 public key, base64 of the raw 32 bytes
    certificate: str = ""     # PEM X.509 certificate used for PDF signatures


@dataclass(frozen=True)
class ProjectInfo:
    number: str
    name: str
    root: Path
    client: str = ""
    site: str = ""
    paper: str = "A4"          # "A4" or "Letter"
    people: tuple[Person, ...] = ()


@dataclass(frozen=True)
class Assumption:
    id: str
    text: str
    basis: str = ""
    open: bool = False


@dataclass(frozen=True)
class Reference:
    id: str
    text: str


@dataclass(frozen=True)
class InputRow:
    """One parameter: the text as given and its SI value."""
    name: str
    given: str              # e.g. "1.2 MN/m"
    value: float            # SI value
    unit: str               # SI unit the value is in, e.g. "N/m"
    source: str = ""
    note: str = ""


@dataclass(frozen=True)
class CoordinateRow:
    name: str
    unit: str
    label: str = ""


@dataclass(frozen=True)
class Step:
    """One step of the derivation, kept as data: `title` = `expr`.

    `symbol` is a LaTeX left-hand side such as r"\\frac{\\partial L}{\\partial \\dot{x}}";
    `expr` is a sympy expression (or Matrix) in the calc's symbols, where the
    velocity of q is the symbol `dot(q)` and its acceleration `ddot(q)`.
    """
    title: str
    symbol: str
    expr: Any
    coordinate: str | None = None


@dataclass(frozen=True)
class Check:
    """One self-check of a calc; a calc passes only when every check passes."""
    kind: str               # equilibrium, modes, solver, integrators, energy, constraint, criterion, crosscheck
    name: str
    passed: bool
    detail: str = ""


@dataclass(frozen=True)
class Equilibrium:
    values: dict[str, float]          # coordinate -> value in its declared unit (at `time_s`)
    units: dict[str, str]             # coordinate -> declared unit (e.g. "mm", "deg")
    stable: bool
    verdict: str                      # e.g. "stable: stiffness positive definite"
    residual: float                   # largest |generalised force| left at the solution
    multipliers: dict[str, float] = field(default_factory=dict)   # constraint forces at rest, display unit
    kind: str = "static"              # static, steady motion, static, time frozen
    time_s: float = 0.0               # the time loads and constraints are taken at, s
    note: str = ""                    # how the state was defined (velocities, time)
    velocities: dict[str, float] = field(default_factory=dict)    # prescribed velocities of a steady
                                      # motion, coordinate -> value in its declared unit per second
    growth_rate_per_s: float = float("nan")   # largest growth rate of an unstable equilibrium, 1/s
    doubling_time_s: float = float("nan")     # ln 2 / growth rate, s
    expected_unstable: bool = False   # [analysis] expect_unstable
    multiplier_units: dict[str, str] = field(default_factory=dict)  # constraint -> that display unit


@dataclass(frozen=True)
class Mode:
    index: int                        # 1-based, sorted by natural frequency
    kind: str                         # oscillatory, overdamped, rigid-body, unstable
    natural_frequency_hz: float
    natural_frequency_rad_s: float
    damping_ratio: float
    damped_frequency_hz: float
    shape: dict[str, float]           # largest component normalised to 1 (real part of a complex shape)
    # All of f_n = |λ|/2π, ζ = −Re λ/|λ| and f_d = |Im λ|/2π come from the same root λ;
    # f_n and ζ are NaN for a real growing root (no frequency), ζ is NaN for a rigid-body mode.
    roots: tuple[tuple[float, float], ...] = ()     # the mode's two roots (Re, Im), 1/s
    growth_rate_per_s: float = float("nan")         # Re λ > 0 of an unstable mode, 1/s
    doubling_time_s: float = float("nan")           # ln 2 / growth rate, s
    shape_magnitude: dict[str, float] | None = None  # complex shapes only: |φ_j| (largest 1)
    shape_phase_deg: dict[str, float] | None = None  # complex shapes only: arg φ_j, degrees


@dataclass(frozen=True)
class Linearisation:
    coordinates: tuple[str, ...]
    M: np.ndarray
    C: np.ndarray                     # symmetric (damping) part
    G: np.ndarray                     # skew (gyroscopic) part of the velocity matrix
    K: np.ndarray                     # symmetric stiffness
    N: np.ndarray                     # skew (circulatory) part of the stiffness
    velocities: tuple[float, ...] = ()   # q̇ about which it is taken (SI; non-zero in steady motion)
    time: float = 0.0                 # s, the time it is taken at


@dataclass(frozen=True)
class ResponsePeak:
    """Largest steady amplitude of one coordinate or output over the swept range."""
    amplitude: float                  # in the display unit of the coordinate or output
    frequency_hz: float


@dataclass(frozen=True)
class FrequencyResponse:
    frequency_hz: np.ndarray
    amplitude: dict[str, np.ndarray]  # coordinate or output -> amplitude, in units[name]
    phase_deg: dict[str, np.ndarray]
    units: dict[str, str]             # display unit of each coordinate or output (mm, deg, kN)
    excitation: dict[str, str]        # coordinate -> amplitude expression text
    peaks: dict[str, ResponsePeak] = field(default_factory=dict)
    omitted: dict[str, str] = field(default_factory=dict)   # output -> why it is not shown


@dataclass(frozen=True)
class SolverRun:
    method: str
    success: bool
    status: int
    message: str
    nfev: int


@dataclass(frozen=True)
class Series:
    """A quantity along the time history, in its display unit."""
    name: str
    values: np.ndarray
    unit: str
    label: str = ""
    kind: str = "coordinate"          # coordinate, velocity, output, constraint


@dataclass(frozen=True)
class TimeHistory:
    t: np.ndarray                     # s
    series: tuple[Series, ...]
    primary: SolverRun                # DOP853
    secondary: SolverRun              # the independent integrator
    agreement: float                  # largest normalised difference between the two
    agreement_tolerance: float
    constraint_drift: float | None = None
    comparison_points: int = 0        # times at which the two integrators were compared
    fastest_hz: float = float("nan")  # fastest frequency seen (linearised or observed), Hz
    fastest_basis: str = ""           # "linearised" or "observed"
    sampling_note: str = ""           # non-empty when the samples are coarse against the motion


@dataclass(frozen=True)
class EnergyAudit:
    t: np.ndarray
    h: np.ndarray                     # energy function (Jacobi integral), J
    T: np.ndarray
    V: np.ndarray
    dissipated: np.ndarray            # integral of q̇·∂R/∂q̇ dt, J
    work_in: np.ndarray               # integral of (Q·q̇ − ∂L/∂t + constraint power) dt, J
    residual: np.ndarray              # h − h0 + dissipated − work_in, J
    max_relative_residual: float
    tolerance: float
    passed: bool
    natural: bool                     # True when h = T + V
    notes: tuple[str, ...] = ()


@dataclass(frozen=True)
class OutputSummary:
    name: str
    unit: str
    label: str
    peak: float                       # max |value| over the dense solution, in `unit`
    max: float
    min: float
    t_peak: float = float("nan")      # s, when the peak, max and min occur
    t_max: float = float("nan")
    t_min: float = float("nan")


@dataclass(frozen=True)
class ResultValue:
    name: str
    expr: str
    value: float                      # in `unit`
    unit: str
    label: str = ""


@dataclass(frozen=True)
class CriterionRow:
    name: str
    demand_expr: str
    capacity_expr: str
    demand: float                     # in `unit`
    capacity: float
    unit: str
    ratio: float
    passed: bool
    reference: str = ""


@dataclass(frozen=True)
class CrosscheckInput:
    """One handbook input of a crosscheck: the calc expression as written and its value."""
    name: str                         # the case's input name, e.g. "L"
    expr: str                         # as written in the calc, e.g. "L*M/(M + m)"
    value: float                      # SI, in `unit`
    unit: str                         # the case's SI unit of this input ("1" for a pure number)


@dataclass(frozen=True)
class CrosscheckRow:
    case: str
    title: str
    quantity: str
    formula: str                      # LaTeX of the closed form
    handbook: float                   # SI
    computed: float
    relative_error: float
    tolerance: float
    tolerance_reason: str
    passed: bool                      # within tolerance AND independent
    source: str                       # citation: book, edition, chapter topic
    validity: tuple[tuple[str, bool], ...] = ()   # (limit as text, holds?)
    inputs: tuple[CrosscheckInput, ...] = ()
    query: str = ""                   # the compared query as written, e.g. "natural_frequency(2)"
    unit: str = ""                    # SI unit of the quantity ("1" for a pure number)
    independent: bool = True          # False: the comparison cannot fail on its own
    dependence: str = ""              # why it is not independent ("" when it is)


@dataclass
class CalcReport:
    """Everything known about one calc after load, derive, solve and check."""
    number: str
    title: str
    source_path: Path
    source_text: str
    input_hash: str                   # SHA-256 of the calc file bytes
    revision: str = "A"
    status: str = "draft"             # draft, issued, superseded
    purpose: str = ""                 # Markdown
    assumptions: tuple[Assumption, ...] = ()
    references: tuple[Reference, ...] = ()
    inputs: tuple[InputRow, ...] = ()
    coordinates: tuple[CoordinateRow, ...] = ()
    derivation: tuple[Step, ...] = ()
    equations: tuple[Step, ...] = ()
    equilibrium: Equilibrium | None = None
    linearisation: Linearisation | None = None
    modes: tuple[Mode, ...] = ()
    frequency_response: FrequencyResponse | None = None
    time_history: TimeHistory | None = None
    energy: EnergyAudit | None = None
    outputs: tuple[OutputSummary, ...] = ()
    results: tuple[ResultValue, ...] = ()
    criteria: tuple[CriterionRow, ...] = ()
    crosschecks: tuple[CrosscheckRow, ...] = ()
    checks: tuple[Check, ...] = ()
    cautions: tuple[str, ...] = ()
    hazards: tuple[str, ...] = ()     # suspended_load, people_under_load, rotating_machinery
    error: Exception | None = None    # set when the calc could not be analysed at all
    software: dict[str, str] = field(default_factory=dict)

    @property
    def passed(self) -> bool:
        return self.error is None and all(c.passed for c in self.checks)

    @property
    def largest_ratio(self) -> float | None:
        ratios = [c.ratio for c in self.criteria]
        return max(ratios) if ratios else None


@dataclass
class PackageModel:
    project: ProjectInfo
    calcs: list[CalcReport]
    software: dict[str, str] = field(default_factory=dict)
    build_date: str = ""              # ISO date from SOURCE_DATE_EPOCH, else ""
