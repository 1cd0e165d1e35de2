"""Phase one of every command: load and analyse a whole project into reports.

Each calc file is read once (`read_sources`); its bytes are what is hashed,
analysed, rendered and cached, so a file edited during a command cannot mix
two contents into one result.
"""

from __future__ import annotations

import functools
import hashlib
import os
from dataclasses import dataclass
from pathlib import Path

from .analysis import analyse, failed_report
from .calcfile.loader import load_calc
from .calcfile.toml_source import MAX_FILE_BYTES
from .errors import CalcsheafError, InputError
from .isolation import run_isolated, stage
from .model import CalcReport, ProjectInfo
from .project import calc_files, load_project


@dataclass(frozen=True)
class CalcSource:
    """A calc file and the bytes read from it for this command.

    `raw` is None when the file could not be read as a regular file of allowed
    size; the loader then reads it itself and reports why it is refused."""
    path: Path
    raw: bytes | None

    @property
    def digest(self) -> str | None:
        return None if self.raw is None else hashlib.sha256(self.raw).hexdigest()


def read_source(path: Path) -> CalcSource:
    """Read one calc file once (no links, at most MAX_FILE_BYTES)."""
    try:
        if path.is_symlink() or not path.is_file():
            return CalcSource(path, None)
        with open(path, "rb") as fh:
            raw = fh.read(MAX_FILE_BYTES + 1)
    except OSError:
        return CalcSource(path, None)
    return CalcSource(path, raw if len(raw) <= MAX_FILE_BYTES else None)


def read_sources(root: Path) -> list[CalcSource]:
    """Every calc file of the project, each read once, sorted by name."""
    return [read_source(p) for p in calc_files(root)]


@dataclass
class Outcome:
    path: Path
    report: CalcReport


def analyse_one(path: Path, raw: bytes | None = None) -> CalcReport:
    """A calc's report from `raw` (the bytes read from `path`; None reads the file);
    a calc that cannot be loaded or derived gets a failed report."""
    try:
        stage("derive")
        return analyse(load_calc(path, raw))
    except CalcsheafError as exc:
        return failed_report(path, exc, raw)


def analyse_source(source: CalcSource) -> CalcReport:
    return analyse_one(source.path, source.raw)


def failed_source(source: CalcSource, error: CalcsheafError) -> CalcReport:
    return failed_report(source.path, error, source.raw)


def analyse_paths(paths: list[Path], jobs: int | None = None, progress=None) -> list[CalcReport]:
    """Reports of many calcs, each analysed in its own limited process, `jobs` at a time."""
    return analyse_sources([read_source(Path(p)) for p in paths], jobs, progress)


def analyse_sources(sources: list[CalcSource], jobs: int | None = None, progress=None) -> list[CalcReport]:
    """Reports of calcs from the bytes already read, each in its own limited process."""
    return run_isolated(analyse_source, list(sources), jobs or default_jobs(), failed_source, progress)


def default_jobs() -> int:
    return os.cpu_count() or 1


def analyse_project(root: Path, jobs: int | None = None, progress=None) -> tuple[ProjectInfo, list[Outcome]]:
    project = load_project(root)
    sources = read_sources(root)
    outcomes = [Outcome(s.path, r) for s, r in zip(sources, analyse_sources(sources, jobs, progress))]
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


def calc_key(source: CalcSource, records: str, date: str) -> str | None:
    """Cache key of one calc: its name and bytes, the project's records, the build date
    and the tool's code; None for a calc that could not be read (never cached)."""
    from .cache import key
    if source.raw is None:
        return None
    return key("calc", source.path.name, source.raw, records, date)


RECORDS = ("project.toml", "signoffs", "issued", "templates")   # what every calc page reads


def records_digest(root: Path) -> str:
    """SHA-256 over the project's records (project.toml, sign-offs, issued, templates)."""
    from .cache import tree_digest
    return tree_digest(root, RECORDS)


def build_calcs(root: Path, project: ProjectInfo, cache, jobs: int | None, progress,
                date: str, worker, render, sources: list[CalcSource] | None = None,
                records: str | None = None) -> list[tuple[CalcReport, dict[str, bytes]]]:
    """(report, site files) of every calc; with a cache, only calcs whose inputs changed are redone.

    `cache`: a cache.Cache, or None to analyse and render every calc afresh without
    reading or writing any project cache (equation images included) -- what
    `issue` and `verify --recompute` need.  `sources`: the calc files as read once
    by the caller (default: read now); `records`: records_digest(root) taken
    before anything else was read (default: now).  Entries are stored only when
    the records did not change while the calcs were built.  `worker(source, *,
    project, date, use_cache)` analyses and renders one calc in its isolated process
    (the site writer's, passed in so that this layer never imports it);
    `render(report, project, date, use_cache)` renders a calc whose page the worker
    could not make (a failed calc's page).
    """
    from .report_codec import NotStorable, decode_report, encode_report

    sources = read_sources(root) if sources is None else sources
    records = records_digest(root) if records is None else records
    keys = [calc_key(s, records, date) if cache is not None else None for s in sources]
    entries = [_cached(cache, k, s, decode_report) for k, s in zip(keys, sources)]
    todo = [i for i, e in enumerate(entries) if e is None]
    work = functools.partial(worker, project=project, date=date,
                             use_cache=cache is not None)
    fresh = run_isolated(work, [sources[i] for i in todo], jobs or default_jobs(),
                         lambda source, error: (failed_source(source, error), None, []), progress)
    stable = cache is not None and records_digest(root) == records
    for i, (report, files, rejected) in zip(todo, fresh):
        if cache is not None:
            cache.rejected.extend(Path(p) for p in rejected)
        if files is None:
            report, files = render(report, project, date, use_cache=cache is not None)
        entries[i] = (report, files)
        if stable and keys[i] is not None and not _stopped(report):
            try:
                cache.put("calc", keys[i], {"report": encode_report(report)}, files)
            except NotStorable:
                pass
    _refuse_duplicate_numbers([Outcome(s.path, r) for s, (r, _) in zip(sources, entries)])
    return entries


def _cached(cache, entry_key: str | None, source: CalcSource, decode):
    """(report, files) of an authentic cache entry for exactly these bytes, else None."""
    if cache is None or entry_key is None:
        return None
    hit = cache.get("calc", entry_key)
    if hit is None:
        return None
    meta, files = hit
    try:
        return decode(meta["report"], source.path, source.raw), files
    except (KeyError, TypeError, ValueError, CalcsheafError):
        return None


def _stopped(report: CalcReport) -> bool:
    """True for a calc stopped by a time or memory limit (never cached: it may pass next time)."""
    return report.error is not None and "was stopped" in getattr(report.error, "problem", "")
