"""Where a calc's issued revisions live and in what order: issued/<CALC>/<REV>/.

The one owner of the revision-folder layout, read by revisions (issue, history),
signoffs (the latest issued manifest a sign-off is bound to) and verify.  Links under
issued/ are never followed; a manifest is parsed only through manifest.parse_json.
"""

from __future__ import annotations

from pathlib import Path

from calcsheaf.errors import ArchiveError

from . import projectfiles
from .manifest import MANIFEST, parse_json


def calc_folder(project_root: Path, calc_number: str) -> Path:
    projectfiles.identifiers_check("calc number", calc_number, "calc")
    return Path(project_root) / "issued" / calc_number


def revision_folder(project_root: Path, calc_number: str, revision: str) -> Path:
    return calc_folder(project_root, calc_number) / revision


def linked_paths(project_root: Path, calc_number: str) -> list[Path]:
    """issued/, issued/<CALC> and every entry directly in it that is a symbolic link: none
    belongs in an archive (a link makes another calc's revision, or a folder outside the
    project, pass as this calc's)."""
    issued = Path(project_root) / "issued"
    base = calc_folder(project_root, calc_number)
    found = [p for p in (issued, base) if p.is_symlink()]
    if base.is_dir() and not found:
        found += [p for p in sorted(base.iterdir()) if p.is_symlink()]
    return found


def refuse_links(project_root: Path, calc_number: str) -> None:
    """ArchiveError naming the first symbolic link under issued/ for this calc."""
    links = linked_paths(project_root, calc_number)
    if links:
        raise ArchiveError("is a symbolic link; calcsheaf never follows links in issued/ "
                           "(a link can make another calc's revision, or a folder outside the "
                           "project, pass as this calc's)", file=links[0],
                           fix="replace the link by the real folder from the archive, or "
                               "remove it")


def _manifests(project_root: Path, calc_number: str) -> dict[str, tuple[bytes, dict]]:
    found = {}
    base = calc_folder(project_root, calc_number)
    for folder in sorted(base.iterdir()) if base.is_dir() else []:
        path = folder / MANIFEST
        if folder.is_dir() and not folder.name.startswith(".") and path.is_file():
            data = path.read_bytes()
            found[folder.name] = (data, _parsed_manifest(path, data))
    return found


MANIFEST_KEYS = ("calc", "revision", "content_hash", "calc_file", "files")


def _parsed_manifest(path: Path, data: bytes) -> dict:
    """A manifest's fields; ArchiveError when the file is not one (damaged or hand-made)."""
    try:
        manifest = parse_json(data)
    except ValueError:
        manifest = None
    problem = manifest_problem(manifest)
    if problem:
        raise ArchiveError(f"is not a calcsheaf manifest ({problem})", file=path,
                           fix="restore this issued revision from the archive copy; "
                               "`calcsheaf verify` on it shows what changed")
    return manifest


def manifest_problem(manifest) -> str | None:
    """What makes parsed JSON not a usable manifest (None when it is one)."""
    if not isinstance(manifest, dict):
        return "not a JSON object"
    missing = [k for k in MANIFEST_KEYS if k not in manifest]
    if missing:
        return f"missing {', '.join(missing)}"
    wrong = [k for k in MANIFEST_KEYS[:-1] if not isinstance(manifest[k], str)]
    if not isinstance(manifest["files"], dict) or not all(
            isinstance(k, str) and isinstance(v, str) for k, v in manifest["files"].items()):
        wrong.append("files")
    link = manifest.get("supersedes")
    if link is not None and not (isinstance(link, dict) and all(
            isinstance(link.get(k), str) for k in ("revision", "manifest_sha256"))):
        wrong.append("supersedes")
    for key in ("prepared_by", "checked_by"):
        if not isinstance(manifest.get(key, {}), dict):
            wrong.append(key)
    return f"wrong type of {', '.join(wrong)}" if wrong else None


def ordered_revisions(project_root: Path, calc_number: str) -> list[tuple[str, bytes, dict]]:
    """(revision, manifest bytes, manifest) oldest first, following the `supersedes` links."""
    found = _manifests(project_root, calc_number)
    superseded = {m.get("supersedes", {}).get("revision") for _, m in found.values()
                  if m.get("supersedes")}
    heads = [rev for rev in found if rev not in superseded]
    order: list[str] = []
    for head in sorted(heads, key=lambda r: (found[r][1].get("date", ""), r)):
        chain, rev = [], head
        while rev in found and rev not in order and rev not in chain:
            chain.append(rev)
            rev = (found[rev][1].get("supersedes") or {}).get("revision")
        order.extend(r for r in reversed(chain) if r not in order)
    order.extend(sorted(r for r in found if r not in order))
    return [(rev, found[rev][0], found[rev][1]) for rev in order]
