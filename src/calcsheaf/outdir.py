"""Output folders: calcsheaf replaces only folders it made itself.

`build --out DIR` and `selftest --out DIR` swap a freshly written folder in
place of DIR, which discards what DIR held.  So DIR must be new, empty, or
marked as a calcsheaf output by the marker file MARKER (written into every
output folder and listed in its SHA256SUMS); a site written before the marker
existed is recognised by a SHA256SUMS that lists exactly its files.  An output
folder may never be, contain, or sit inside the project's sources.
"""

from __future__ import annotations

from pathlib import Path

from .errors import BuildError

MARKER = ".calcsheaf-output"
MARKER_TEXT = b"calcsheaf output folder: replaced as a whole by the next build; do not keep files here\n"
# Inside a project: what a build reads, or keeps between builds.
SOURCES = ("project.toml", "calcs", "signoffs", "issued", "templates", ".calcsheaf-cache")
_FIX = "give --out a new or empty folder (or one calcsheaf wrote before), or move those files away yourself"


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
    """True for an empty folder, a folder holding the marker file, or a pre-marker site."""
    try:
        entries = list(folder.iterdir())
    except OSError:
        return False
    if not entries:
        return True
    marker = folder / MARKER
    if marker.is_file() and not marker.is_symlink():
        return True
    return _listed_site(folder)


def _listed_site(folder: Path) -> bool:
    """A site written before the marker: SHA256SUMS lists exactly the files under it."""
    sums = folder / "SHA256SUMS"
    if sums.is_symlink() or not sums.is_file():
        return False
    try:
        listed = {line.partition("  ")[2] for line in sums.read_text(encoding="utf-8").splitlines()}
        actual = {p.relative_to(folder).as_posix() for p in folder.rglob("*")
                  if p.is_file() or p.is_symlink()}
    except (OSError, UnicodeDecodeError):
        return False
    return actual == listed | {"SHA256SUMS"}


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
        (folder / MARKER).is_file() or not any(folder.iterdir()))
