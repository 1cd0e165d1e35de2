"""The data types of the handbook library: a case, its quantities and its limits.

Every value going in or out is SI (angles in rad, frequencies in Hz where the
quantity name ends in `_hz`).  A case is pure data plus closed-form functions:
it never runs the general machinery; `selftest_calc` is the calc file that
does, for comparison.
"""

from __future__ import annotations

from dataclasses import dataclass
from types import MappingProxyType
from typing import Callable, Mapping

from calcsheaf.errors import InputError

Inputs = Mapping[str, float]


@dataclass(frozen=True)
class Quantity:
    """One closed-form result of a case.

    `compute` maps SI inputs to the SI value in `unit` (pint-parseable; "1" for
    a pure number).  `design`: a design rule of the inputs alone (an optimum), with no
    analysis result to compare it with; a crosscheck of it compares parameters only and
    is flagged as not independent, so self-test calcs leave it out (its closed form is
    tested in tests/test_handbook_vibration.py).
    """
    name: str
    unit: str
    formula: str
    compute: Callable[[Inputs], float]
    design: bool = False


@dataclass(frozen=True)
class ValidityLimit:
    """A condition under which the closed form holds, evaluated on SI inputs."""
    text: str
    holds: Callable[[Inputs], bool]


def _frozen(mapping: Mapping) -> Mapping:
    return MappingProxyType(dict(mapping))


@dataclass(frozen=True)
class Case:
    """A closed-form handbook case with its source and its self-test calc.

    `inputs` maps each input name to its SI unit; all are required.
    `source` is the sheet-facing citation: book, edition and chapter topic, only as far
    as they can be stated with certainty (never "(from memory)": the closed form itself
    is the basis of the check).  `source_note` is the docs-facing remark on what of the
    citation was recalled rather than checked, kept in docs/handbook.md.
    """
    key: str
    title: str
    family: str
    inputs: Mapping[str, str]
    provides: Mapping[str, Quantity]
    limits: tuple[ValidityLimit, ...]
    source: str
    tolerance: float
    tolerance_reason: str
    selftest_calc: str
    source_note: str = ""

    def __post_init__(self) -> None:
        object.__setattr__(self, "inputs", _frozen(self.inputs))
        object.__setattr__(self, "provides", _frozen(self.provides))

    def missing_inputs(self, given: Mapping[str, object]) -> tuple[str, ...]:
        """Inputs absent from `given`, sorted."""
        return tuple(sorted(set(self.inputs) - set(given)))

    def unknown_inputs(self, given: Mapping[str, object]) -> tuple[str, ...]:
        """Names in `given` that are not inputs of this case, sorted."""
        return tuple(sorted(set(given) - set(self.inputs)))

    def evaluate(self, inputs: Inputs) -> dict[str, float]:
        """Every provided quantity for SI `inputs`; raises InputError on bad inputs."""
        self._validate(inputs)
        return {name: float(q.compute(inputs)) for name, q in self.provides.items()}

    def check_limits(self, inputs: Inputs) -> tuple[tuple[str, bool], ...]:
        """(limit text, holds?) for every validity limit, in declaration order."""
        self._validate(inputs)
        return tuple((lim.text, bool(lim.holds(inputs))) for lim in self.limits)

    def _validate(self, inputs: Inputs) -> None:
        missing, unknown = self.missing_inputs(inputs), self.unknown_inputs(inputs)
        if missing or unknown:
            parts = []
            if missing:
                parts.append("missing " + ", ".join(missing))
            if unknown:
                parts.append("unknown " + ", ".join(unknown))
            raise InputError(
                f"handbook case '{self.key}' inputs: {'; '.join(parts)}",
                key="crosscheck.inputs",
                fix="give exactly the inputs " + ", ".join(
                    f"{n} [{u}]" for n, u in self.inputs.items()))
