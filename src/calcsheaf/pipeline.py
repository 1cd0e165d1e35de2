"""Phase one of every command: load and analyse a whole project into reports."""

from __future__ import annotations

import functools
import os
from dataclasses import dataclass
from pathlib import Path

from .analysis import analyse, failed_report
from .calcfile.loader import load_calc
from .errors import CalcsheafError, InputError
from .isolation import run_isolated, stage
from .model import CalcReport, ProjectInfo
from .project import calc_files, load_project


@dataclass
class Outcome:
    path: Path
    report: CalcReport


def analyse_one(path: Path) -> CalcReport:
    """A calc's report; a calc that cannot be loaded or derived gets a failed report."""
    try:
        stage("derive")
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


def build_calcs(root: Path, project: ProjectInfo, cache, jobs: int | None, progress,
                date: str) -> list[tuple[CalcReport, dict[str, bytes]]]:
    """(report, site files) of every calc; only calcs whose inputs changed are redone.

    A calc is analysed and rendered in its own limited process; the cache key is
    the calc file, the project's records (project.toml, sign-offs, issued
    revisions, template overrides), the build date and the tool's code.
    """
    from .cache import key, tree_digest
    from .commands import publish

    paths = calc_files(root)
    records = tree_digest(root, publish.RECORDS)
    keys = [key("calc", p.name, p.read_bytes(), records, date) for p in paths]
    entries = [cache.get("calc", k) for k in keys]
    todo = [i for i, e in enumerate(entries) if e is None]
    work = functools.partial(publish.analyse_and_render, project=project, date=date)
    fresh = run_isolated(work, [paths[i] for i in todo], jobs or default_jobs(),
                         lambda path, error: (failed_report(path, error), None), progress)
    for i, (report, files) in zip(todo, fresh):
        if files is None:
            report, files = publish.render_entry(report, project, date)
        entries[i] = (report, files)
        if not _stopped(report):
            cache.put("calc", keys[i], entries[i])
    _refuse_duplicate_numbers([Outcome(p, r) for p, (r, _) in zip(paths, entries)])
    return entries


def _stopped(report: CalcReport) -> bool:
    """True for a calc stopped by a time or memory limit (never cached: it may pass next time)."""
    return report.error is not None and "was stopped" in getattr(report.error, "problem", "")
