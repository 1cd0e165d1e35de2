"""Output folders: calcsheaf replaces only folders it made itself.

`build --out DIR` and `selftest --out DIR` swap a freshly written folder in
place of DIR, which discards what DIR held.  So DIR must be new, empty, or
marked as a calcsheaf output by the marker file MARKER, whose content is
exactly MARKER_TEXT (written into every output folder and listed in its
SHA256SUMS).  Nothing else is taken for an output: a folder that merely holds
a SHA256SUMS is a user's folder, and is refused.  An output
folder may never be, contain, or sit inside the project's sources.
"""

from __future__ import annotations

import hashlib
import os
import shutil
import tempfile
from pathlib import Path

from .errors import BuildError

MARKER = ".calcsheaf-output"
MARKER_TEXT = b"calcsheaf output folder: replaced as a whole by the next build; do not keep files here\n"
# Inside a project: what a build reads, or keeps between builds.
SOURCES = ("project.toml", "calcs", "signoffs", "issued", "templates", ".calcsheaf-cache")
_FIX = ("choose a new or empty folder with --out (or one calcsheaf wrote, which holds the "
        f"{MARKER} file), or delete this folder yourself if its contents are not needed")


def check_output_folder(target: Path, project_root: Path | None = None) -> None:
    """Refuse `target` as an output folder unless calcsheaf may replace it whole.

    Raises BuildError naming the folder when it is a link or a file, holds files
    calcsheaf did not write, or overlaps the sources of `project_root`."""
    target = Path(target)
    if project_root is not None:
        _check_apart_from_sources(target, Path(project_root))
    if target.is_symlink():
        raise BuildError("the output folder is a symbolic link", file=target,
                         fix="give the real folder with --out, not a link to it")
    if not target.exists():
        return
    if not target.is_dir():
        raise BuildError("the output folder is a file, not a folder", file=target, fix=_FIX)
    if not is_calcsheaf_output(target):
        count = sum(1 for _ in target.iterdir())
        raise BuildError(f"the output folder already holds {count} item(s) that calcsheaf did not "
                         f"write (no {MARKER} marker file), and a build replaces the whole folder",
                         file=target, fix=_FIX)


def is_calcsheaf_output(folder: Path) -> bool:
    """True for an empty folder, or one holding the marker file with calcsheaf's exact content."""
    try:
        entries = list(folder.iterdir())
    except OSError:
        return False
    if not entries:
        return True
    return has_marker(folder)


def has_marker(folder: Path) -> bool:
    """True when `folder` holds the marker as a plain file (not a link) with exactly MARKER_TEXT."""
    marker = folder / MARKER
    if marker.is_symlink() or not marker.is_file():
        return False
    try:
        with open(marker, "rb") as fh:
            return fh.read(len(MARKER_TEXT) + 1) == MARKER_TEXT
    except OSError:
        return False


def _check_apart_from_sources(target: Path, root: Path) -> None:
    out, project = target.resolve(), root.resolve()
    if out == project or out in project.parents:
        raise BuildError(f"the output folder {'is' if out == project else 'contains'} the project "
                         f"folder {root}, and a build replaces the whole output folder",
                         file=target, fix="give --out a folder outside the project, e.g. "
                                          f"{root / '_site'} (the default)")
    for name in SOURCES:
        source = project / name
        if out == source or source in out.parents:
            raise BuildError(f"the output folder is inside the project's sources ({root / name})",
                             file=target, fix="give --out a folder outside project.toml, calcs/, "
                                              "signoffs/, issued/, templates/ and the cache, "
                                              f"e.g. {root / '_site'} (the default)")


def is_leftover(folder: Path) -> bool:
    """True for a temporary or old folder of an interrupted write (it holds the marker, or nothing)."""
    return folder.is_dir() and not folder.is_symlink() and (
        has_marker(folder) or not any(folder.iterdir()))


def write_site(target: Path, files: dict[str, bytes], project_root: Path | None = None) -> None:
    """Write `files` (relative path -> bytes) plus the marker and SHA256SUMS as the new `target`,
    atomically.  `target` must be new, empty or a calcsheaf output (see outdir); a failed
    write (disk full, read-only folder) removes its temporary folder and leaves `target` as it was."""
    check_output_folder(target, project_root)
    _clean_leftovers(target)
    # An unpredictable name made with O_EXCL: a link planted beside the target is never followed.
    temp = Path(tempfile.mkdtemp(prefix=f".{target.name}.tmp-", dir=target.parent))
    try:
        os.chmod(temp, 0o777 & ~_umask())             # mkdtemp makes 0700; a site is shared
        (temp / MARKER).write_bytes(MARKER_TEXT)      # first: a leftover is recognisably ours
        for rel in sorted(files):
            path = temp / rel
            path.parent.mkdir(parents=True, exist_ok=True)
            path.write_bytes(files[rel])
        (temp / "SHA256SUMS").write_bytes(sha256sums({**files, MARKER: MARKER_TEXT}))
        _fsync_tree(temp)
    except BaseException:
        shutil.rmtree(temp, ignore_errors=True)
        raise
    _swap_in(temp, target)


def _swap_in(temp: Path, target: Path) -> None:
    """Replace `target` by the complete folder `temp` (exchange, or two renames)."""
    if target.exists() and _exchange(temp, target):
        shutil.rmtree(temp)
        return
    if target.exists():
        old = Path(tempfile.mkdtemp(prefix=f".{target.name}.old-", dir=target.parent))
        os.rename(target, old)               # replaces the empty folder just made
        try:
            os.rename(temp, target)
        except OSError:                      # put the previous output back before reporting
            os.rename(old, target)
            shutil.rmtree(temp, ignore_errors=True)
            raise
        shutil.rmtree(old)
    else:
        os.rename(temp, target)


def _umask() -> int:
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


def sha256sums(files: dict[str, bytes]) -> bytes:
    """`sha256sum -c` compatible listing of every file, sorted by path."""
    lines = [f"{hashlib.sha256(files[rel]).hexdigest()}  {rel}\n" for rel in sorted(files)]
    return "".join(lines).encode()


def _clean_leftovers(target: Path) -> None:
    """Remove the temporary and old folders of interrupted writes (only folders marked as ours)."""
    for stale in sorted(target.parent.glob(f".{target.name}.tmp-*")) + \
            sorted(target.parent.glob(f".{target.name}.old-*")):
        if is_leftover(stale):
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
    return renameat2(AT_FDCWD, os.fsencode(a), AT_FDCWD, os.fsencode(b), RENAME_EXCHANGE) == 0
