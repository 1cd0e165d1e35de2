"""`calcsheaf build PROJECT [--out DIR] [--jobs N]`: analyse every calc, then write the site.

Incremental: a build whose inputs (calc files, project.toml, sign-offs, issued
records, template overrides, tool code, SOURCE_DATE_EPOCH) are unchanged and
whose site is intact does nothing; otherwise only changed calcs are analysed
and rendered again (content-addressed, authenticated cache), and the pages
that list calcs.  Each calc file is read once: the up-to-date stamp, the cache
keys and the analysis all use those bytes, and a build during which the
project's records changed records no stamp and caches nothing.

The site is written into a sibling temporary folder and swapped in atomically
(renameat2 RENAME_EXCHANGE where the kernel has it), so a build killed at any
moment leaves the previous site whole.  Builds of one site are serialised by a
lock file; leftovers of killed builds are removed by the next one.
"""

from __future__ import annotations

import hashlib
import sys
import time
from pathlib import Path

from filelock import FileLock, Timeout

from .. import settings
from ..cache import Cache, key
from ..errors import BuildError, InputError
from ..outdir import check_output_folder, write_site


def build(project_root: Path, out_dir: Path | None = None, jobs: int | None = None,
          out=None, err=None) -> int:
    """Build the site; 0 when every calc passes, 1 when any fails (the site is still written)."""
    out, err = out or sys.stdout, err or sys.stderr
    root = Path(project_root)
    if not (root / "project.toml").is_file():
        raise InputError("is not a calcsheaf project (no project.toml)", file=root,
                         fix="give the folder that holds project.toml, or make one with 'calcsheaf new PATH'")
    started = time.monotonic()
    target = Path(out_dir) if out_dir else root / "_site"
    check_output_folder(target, root)
    from ..pipeline import read_sources, records_digest
    with _locked(target):
        records = records_digest(root)
        sources = read_sources(root)
        site_key = input_key(root, target, records, sources)
        stamp = target.parent / f".{target.name}.key"
        previous = _up_to_date(target, stamp, site_key)
        if previous is not None:
            print(f"site {target} is up to date (no input changed) "
                  f"[{time.monotonic() - started:.2f} s]", file=out)
            return previous
        rc, count, failed = _full_build(root, target, jobs, out, err, sources, records)
        if records_digest(root) == records:
            stamp.write_text(f"{site_key} {rc}\n")
        else:
            stamp.unlink(missing_ok=True)
            print("note: the project's records changed during the build; the next build "
                  "starts afresh", file=err)
    print(f"built {count} calc(s) into {target} in {time.monotonic() - started:.1f} s"
          f"; {failed} failed", file=out)
    return rc


def _full_build(root: Path, target: Path, jobs, out, err, sources, records) -> tuple[int, int, int]:
    from ..model import PackageModel
    from ..pipeline import build_calcs
    from ..project import load_project
    from ..render.theme import limits
    from ..software import versions
    from . import publish
    from .selftest import cached_selftest_files

    limits()                     # malformed template limits are refused before any work
    project = load_project(root)
    date = publish.build_date()
    cache = Cache(root)
    entries = build_calcs(root, project, cache, jobs, _progress(out), date,
                          publish.analyse_and_render, publish.render_entry, sources, records)
    for note in cache.report():
        print(f"note: {note}", file=err)
    package = PackageModel(project=project, calcs=[r for r, _ in entries], software=versions(),
                           build_date=date)
    files = publish.site_files(package, [f for _, f in entries], cached_selftest_files())
    write_site(target, files, root)
    failed = [r for r in package.calcs if not r.passed]
    for r in package.calcs:
        print(f"{'PASS' if r.passed else 'FAIL'}  {r.number:<10} {r.title}", file=out)
        if r.error is not None:
            print("    " + getattr(r.error, "message", str(r.error)).replace("\n", "\n    "), file=err)
    return (1 if failed else 0), len(package.calcs), len(failed)


def _progress(out):
    """Per-calc stages (derive, solve, render): one line each, or a live status line on a terminal."""
    tty = hasattr(out, "isatty") and out.isatty()
    current: dict[str, str] = {}

    def show(path: Path, stage: str) -> None:
        if not tty:
            print(f"  {path.name}: {stage}", file=out, flush=True)
            return
        if stage == "done":
            current.pop(path.name, None)
        else:
            current[path.name] = stage
        line = ", ".join(f"{name} {what}" for name, what in sorted(current.items()))
        print(f"\r\033[K  {line}", end="" if current else "\r\033[K", file=out, flush=True)
    return show


def input_key(root: Path, target: Path, records: str | None = None, sources=None) -> str:
    """SHA-256 over everything a build reads, plus the tool's code fingerprint.

    `records`: pipeline.records_digest of the project; `sources`: the calc files as
    read once for this build (pipeline.CalcSource), by name and content hash; either
    is read now when not given."""
    from ..pipeline import read_sources, records_digest
    records = records_digest(root) if records is None else records
    sources = read_sources(root) if sources is None else sources
    calcs = "".join(f"{s.path.name}\0{s.digest or 'unreadable'}\n" for s in sources)
    return key(str(target.resolve()), str(settings.source_date_epoch() or ""), records, calcs)


def _up_to_date(target: Path, stamp: Path, site_key: str) -> int | None:
    """The previous exit code when the stamp matches and every file is as SHA256SUMS says."""
    try:
        recorded, rc = stamp.read_text().split()
        if recorded != site_key:
            return None
        sums = (target / "SHA256SUMS").read_text().splitlines()
    except (OSError, ValueError):
        return None
    listed = set()
    for line in sums:
        digest, _, rel = line.partition("  ")
        listed.add(rel)
        try:
            if hashlib.sha256((target / rel).read_bytes()).hexdigest() != digest:
                return None
        except OSError:
            return None
    actual = {p.relative_to(target).as_posix() for p in target.rglob("*") if p.is_file()}
    return int(rc) if actual == listed | {"SHA256SUMS"} else None


class _locked:
    """Serialise builds of one site with a lock file beside it."""

    def __init__(self, target: Path) -> None:
        target.parent.mkdir(parents=True, exist_ok=True)
        self.lock = FileLock(str(target.parent / f".{target.name}.lock"))

    def __enter__(self):
        try:
            self.lock.acquire(timeout=900)
        except Timeout:
            raise BuildError("another build of this site is still running", file=self.lock.lock_file,
                             fix="wait for it to finish") from None
        return self

    def __exit__(self, *exc):
        self.lock.release()
