"""Frozen, validated specification of one calc file.

Every expression is already a sympy expression in the calc's symbols; every
value is SI.  `lines` maps key paths (e.g. "energy.kinetic", "output[2].expr")
to line numbers in the source file, for later messages.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import sympy as sp


@dataclass(frozen=True)
class Parameter:
    name: str
    given: str
    value: float          # SI
    unit: str             # SI unit text
    dimension: Any
    source: str = ""
    note: str = ""


@dataclass(frozen=True)
class Coordinate:
    name: str
    unit: str             # display unit as given, e.g. "mm", "deg"
    si_unit: str          # "m", "1" (rad) ...
    dimension: Any
    factor: float         # display value = SI value / factor
    label: str = ""


@dataclass(frozen=True)
class PointForce:
    position: tuple[sp.Expr, ...]
    force: tuple[sp.Expr, ...]
    label: str = ""


@dataclass(frozen=True)
class Constraint:
    name: str
    equation: sp.Expr
    unit: str             # display unit of the constraint force
    factor: float
    label: str = ""


@dataclass(frozen=True)
class NamedExpr:
    """An [[output]] or [[result]]: a named expression with its display unit."""
    name: str
    expr: sp.Expr
    text: str
    unit: str
    factor: float         # display value = SI value / factor
    label: str = ""


@dataclass(frozen=True)
class Criterion:
    name: str
    demand: sp.Expr
    demand_text: str
    capacity: sp.Expr
    capacity_text: str
    unit: str
    factor: float
    reference: str = ""


@dataclass(frozen=True)
class Crosscheck:
    case: str
    inputs: tuple[tuple[str, sp.Expr], ...]
    compare: tuple[tuple[str, sp.Expr, str], ...]      # quantity, query expr, text
    tolerance: float | None = None
    input_texts: tuple[tuple[str, str], ...] = ()       # input name, expression as written


@dataclass(frozen=True)
class TimeHistorySpec:
    duration: float       # s
    points: int
    rtol: float = 1e-10
    atol: float = 1e-12
    second_method: str = "LSODA"
    agreement_tolerance: float = 1e-6


@dataclass(frozen=True)
class FrequencyResponseSpec:
    force: tuple[tuple[str, sp.Expr, str], ...]       # coordinate, amplitude, text
    start_hz: float
    stop_hz: float
    points: int
    spacing: str = "linear"


@dataclass(frozen=True)
class AnalysisSpec:
    equilibrium: bool = True
    modes: bool = True
    energy_tolerance: float = 1e-6
    expect_unstable: bool = False     # an unstable equilibrium is reported but does not fail the calc


@dataclass(frozen=True)
class CalcSpec:
    path: Path
    source_text: str
    number: str
    title: str
    purpose: str
    revision: str
    hazards: tuple[str, ...]
    assumptions: tuple[Any, ...]
    references: tuple[Any, ...]
    parameters: tuple[Parameter, ...]
    coordinates: tuple[Coordinate, ...]
    kinetic: sp.Expr
    potential: sp.Expr
    dissipation: sp.Expr
    generalized_forces: tuple[tuple[str, sp.Expr], ...]
    point_forces: tuple[PointForce, ...]
    constraints: tuple[Constraint, ...]
    initial: tuple[tuple[str, float], ...]           # coordinate and dot(coordinate) -> SI
    analysis: AnalysisSpec
    time_history: TimeHistorySpec | None
    frequency_response: FrequencyResponseSpec | None
    outputs: tuple[NamedExpr, ...]
    results: tuple[NamedExpr, ...]
    criteria: tuple[Criterion, ...]
    crosschecks: tuple[Crosscheck, ...]
    lines: dict[str, int] = field(default_factory=dict, compare=False, hash=False)

    @property
    def coordinate_names(self) -> tuple[str, ...]:
        return tuple(c.name for c in self.coordinates)

    @property
    def parameter_values(self) -> dict[str, float]:
        return {p.name: p.value for p in self.parameters}

    def line(self, key: str) -> int | None:
        """Line of `key` or of the nearest enclosing table."""
        while key:
            if key in self.lines:
                return self.lines[key]
            key = key.rpartition(".")[0]
        return None
