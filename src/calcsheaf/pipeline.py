"""Phase one of every command: load and analyse a whole project into reports."""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path

from .analysis import analyse, failed_report
from .calcfile.loader import load_calc
from .errors import CalcsheafError, InputError
from .isolation import run_isolated
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


def analyse_paths(paths: list[Path], jobs: int | None = None, progress=None) -> list[CalcReport]:
    """Reports of many calcs, each analysed in its own limited process, `jobs` at a time."""
    return run_isolated(analyse_one, list(paths), jobs or default_jobs(), failed_report, progress)


def default_jobs() -> int:
    return os.cpu_count() or 1


def analyse_project(root: Path, jobs: int | None = None, progress=None) -> tuple[ProjectInfo, list[Outcome]]:
    project = load_project(root)
    paths = calc_files(root)
    outcomes = [Outcome(p, r) for p, r in zip(paths, analyse_paths(paths, jobs, progress))]
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


def cached_outcomes(root: Path, cache, jobs: int | None = None, progress=None) -> list[Outcome]:
    """Outcomes of every calc, analysing only calcs whose cache entry is missing."""
    from .cache import key

    paths = calc_files(root)
    keys = [key("report", p.read_bytes()) for p in paths]
    reports = [cache.get("report", k) for k in keys]
    todo = [i for i, r in enumerate(reports) if r is None]
    fresh = analyse_paths([paths[i] for i in todo], jobs, progress)
    for i, report in zip(todo, fresh):
        report.source_path = paths[i]
        reports[i] = report
        if not _stopped(report):
            cache.put("report", keys[i], report)
    for p, r in zip(paths, reports):
        r.source_path = p
    outcomes = [Outcome(p, r) for p, r in zip(paths, reports)]
    _refuse_duplicate_numbers(outcomes)
    return outcomes


def _stopped(report: CalcReport) -> bool:
    """True for a calc stopped by a time or memory limit (never cached: it may pass next time)."""
    return report.error is not None and "was stopped" in getattr(report.error, "problem", "")
