"""`calcsheaf build PROJECT [--out DIR]`: analyse every calc, then write the site.

The site is written into a sibling temporary folder and swapped in atomically
(renameat2 RENAME_EXCHANGE where the kernel has it), so a build killed at any
moment leaves the previous site whole.  Builds of one project are serialised
by a lock file; leftovers of killed builds are removed by the next one.
"""

from __future__ import annotations

import hashlib
import os
import shutil
import sys
import time
from pathlib import Path

from filelock import FileLock, Timeout

from ..errors import BuildError
from ..model import PackageModel
from ..pipeline import analyse_project
from ..render.json import results_json
from ..software import versions
from . import publish


def build(project_root: Path, out_dir: Path | None = None, out=sys.stdout, err=sys.stderr) -> int:
    """Build the site; 0 when every calc passes, 1 when any fails (the site is still written)."""
    root = Path(project_root)
    started = time.monotonic()
    project, outcomes = analyse_project(root)
    target = Path(out_dir) if out_dir else root / "_site"
    package = PackageModel(project=project, calcs=[o.report for o in outcomes], software=versions(),
                           build_date=publish.build_date())
    files = publish.site_files(package)
    with _locked(target):
        write_site(target, files)
    failed = [r for r in package.calcs if not r.passed]
    for r in package.calcs:
        print(f"{'PASS' if r.passed else 'FAIL'}  {r.number:<10} {r.title}", file=out)
        if r.error is not None:
            print("    " + getattr(r.error, "message", str(r.error)).replace("\n", "\n    "), file=err)
    print(f"built {len(package.calcs)} calc(s) into {target} in {time.monotonic() - started:.1f} s"
          f"; {len(failed)} failed", file=out)
    return 1 if failed else 0


def _locked(target: Path):
    target.parent.mkdir(parents=True, exist_ok=True)
    lock = FileLock(str(target.parent / f".{target.name}.lock"))
    try:
        lock.acquire(timeout=600)
    except Timeout:
        raise BuildError("another build of this site is still running", file=target,
                         fix="wait for it to finish, or remove the stale .lock file") from None
    return _Release(lock)


class _Release:
    def __init__(self, lock):
        self.lock = lock

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.lock.release()


def write_site(target: Path, files: dict[str, bytes]) -> None:
    """Write `files` (relative path -> bytes) plus SHA256SUMS as the new `target`, atomically."""
    _clean_leftovers(target)
    temp = target.parent / f".{target.name}.tmp-{os.getpid()}"
    temp.mkdir()
    for rel in sorted(files):
        path = temp / rel
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_bytes(files[rel])
    (temp / "SHA256SUMS").write_bytes(sha256sums(files))
    _fsync_tree(temp)
    if target.exists() and _exchange(temp, target):
        shutil.rmtree(temp)
        return
    if target.exists():
        old = target.parent / f".{target.name}.old-{os.getpid()}"
        os.rename(target, old)
        os.rename(temp, target)
        shutil.rmtree(old)
    else:
        os.rename(temp, target)


def sha256sums(files: dict[str, bytes]) -> bytes:
    """`sha256sum -c` compatible listing of every file, sorted by path."""
    lines = [f"{hashlib.sha256(files[rel]).hexdigest()}  {rel}\n" for rel in sorted(files)]
    return "".join(lines).encode()


def _clean_leftovers(target: Path) -> None:
    for stale in sorted(target.parent.glob(f".{target.name}.tmp-*")) + \
            sorted(target.parent.glob(f".{target.name}.old-*")):
        shutil.rmtree(stale, ignore_errors=True)


def _fsync_tree(folder: Path) -> None:
    for path in sorted(folder.rglob("*")):
        if path.is_file():
            with open(path, "rb") as fh:
                os.fsync(fh.fileno())


def _exchange(a: Path, b: Path) -> bool:
    """Swap two folders in one step (Linux renameat2); False when unavailable."""
    try:
        import ctypes
        libc = ctypes.CDLL(None, use_errno=True)
        renameat2 = libc.renameat2
    except (OSError, AttributeError):
        return False
    AT_FDCWD, RENAME_EXCHANGE = -100, 2
    result = renameat2(AT_FDCWD, os.fsencode(a), AT_FDCWD, os.fsencode(b), RENAME_EXCHANGE)
    return result == 0


__all__ = ["build", "write_site", "sha256sums", "results_json"]
