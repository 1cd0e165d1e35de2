"""Tiny helpers for tests: write a calc TOML into a folder and analyse or derive it."""

from __future__ import annotations

import textwrap
from pathlib import Path

from calcsheaf.calcfile.loader import load_calc
from calcsheaf.calcfile.spec import CalcSpec
from calcsheaf.mechanics.lagrange import Derivation, derive
from calcsheaf.model import CalcReport
from calcsheaf.pipeline import analyse_one


def write_calc(folder: Path, text: str, name: str = "calc.toml") -> Path:
    """Write dedented `text` as `folder/name` and return its path."""
    path = Path(folder) / name
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(textwrap.dedent(text).lstrip(), encoding="utf-8")
    return path


def report_of(folder: Path, text: str, name: str = "calc.toml") -> CalcReport:
    """The CalcReport of a calc written from `text` (a failed report when it cannot load)."""
    return analyse_one(write_calc(folder, text, name))


def derivation_of(folder: Path, text: str, name: str = "calc.toml") -> tuple[CalcSpec, Derivation]:
    """The loaded spec and its derivation; loader errors propagate."""
    spec = load_calc(write_calc(folder, text, name))
    return spec, derive(spec)


def check(report: CalcReport, kind: str) -> list:
    """The checks of `report` of one kind (e.g. "energy", "solver")."""
    return [c for c in report.checks if c.kind == kind]


def result(report: CalcReport, name: str) -> float:
    """The value of the named [[result]] in its display unit."""
    for r in report.results:
        if r.name == name:
            return r.value
    failed = [c.detail for c in report.checks if c.name == name]
    raise KeyError(f"no result {name!r} in {report.number}: {failed or report.error}")
