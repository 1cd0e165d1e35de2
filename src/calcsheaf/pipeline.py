"""Phase one of every command: load and analyse a whole project into reports."""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from .analysis import analyse, failed_report
from .calcfile.loader import load_calc
from .errors import CalcsheafError, InputError
from .model import CalcReport, ProjectInfo
from .project import calc_files, load_project


@dataclass
class Outcome:
    path: Path
    report: CalcReport


def analyse_one(path: Path) -> CalcReport:
    """A calc's report; a calc that cannot be loaded or derived gets a failed report."""
    try:
        return analyse(load_calc(path))
    except CalcsheafError as exc:
        return failed_report(path, exc)


def analyse_paths(paths: list[Path]) -> list[CalcReport]:
    return [analyse_one(p) for p in paths]


def analyse_project(root: Path) -> tuple[ProjectInfo, list[Outcome]]:
    project = load_project(root)
    outcomes = [Outcome(p, analyse_one(p)) for p in calc_files(root)]
    _refuse_duplicate_numbers(outcomes)
    return project, outcomes


def _refuse_duplicate_numbers(outcomes: list[Outcome]) -> None:
    seen: dict[str, Path] = {}
    for o in outcomes:
        number = o.report.number
        if o.report.error is None and number in seen:
            raise InputError(f"calc number '{number}' is also used by {seen[number].name}",
                             file=o.path, key="calc.number", line=None,
                             fix="give every calc in the project its own number")
        seen[number] = o.path
