"""Issued revisions: freezing a signed calc under issued/<CALC>/<REV>/ and its history.

Layout of one revision folder (everything in it is listed in MANIFEST.json):

    MANIFEST.json, MANIFEST.sig.json     hashes of every file; preparer's and checker's Ed25519
    inputs/project.toml                  the project file as it was at issue
    inputs/calcs/<file>.toml             the calc file that was signed
    output/index.html, <CALC>.pdf, results.json (and any other file the build wrote)
    record/people.json                   preparer and checker: id, name, public key, certificate
    record/signoffs.json                 their signed sign-off statements

A newer revision's manifest names the revision it supersedes (with that manifest's SHA-256),
so "superseded" is itself signed and frozen; there is no separate status file to edit.
"""

from __future__ import annotations

import json
import os
import re
import shutil
from pathlib import Path
from typing import Callable

from calcsheaf import __version__
from calcsheaf.errors import ArchiveError

from . import projectfiles
from .canonical import pretty_json, sha256_bytes, today
from .keys import PersonKeys
from .manifest import MANIFEST, SIGNATURES, make_manifest, sign_manifest
from .pdfsign import sign_issued_pdf
from .signoffs import ROLES, signoff_status

REVISION = re.compile(r"^[A-Za-z0-9][A-Za-z0-9._-]{0,15}$")

Render = Callable[..., Path]   # build_calc(project_root, calc, out_dir, *, status, revision, signoff)
Unlock = Callable[[str], PersonKeys]


def calc_folder(project_root: Path, calc_number: str) -> Path:
    return Path(project_root) / "issued" / calc_number


def revision_folder(project_root: Path, calc_number: str, revision: str) -> Path:
    return calc_folder(project_root, calc_number) / revision


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
        manifest = json.loads(data)
    except ValueError:
        manifest = None
    missing = [k for k in MANIFEST_KEYS if not isinstance(manifest, dict) or k not in manifest]
    if missing:
        raise ArchiveError(f"is not a calcsheaf manifest (missing {', '.join(missing)})", file=path,
                           fix="restore this issued revision from the archive copy; "
                               "`calcsheaf verify` on it shows what changed")
    return manifest


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


def revision_history(project_root: Path, calc_number: str) -> list[dict]:
    """Every issued revision, oldest first, for the site's revision table.

    Each: rev, date, status ("issued" | "superseded"), superseded_by (rev or None),
    description, prepared_by and checked_by (names), prepared_by_id, checked_by_id,
    content_hash (SHA-256 of the calc file issued).
    """
    revs = ordered_revisions(project_root, calc_number)
    successor = {(m.get("supersedes") or {}).get("revision"): rev for rev, _, m in revs}
    history = []
    for rev, _, manifest in revs:
        prepared, checked = manifest.get("prepared_by") or {}, manifest.get("checked_by") or {}
        history.append({
            "rev": rev, "date": manifest.get("date", ""),
            "status": "superseded" if rev in successor else "issued",
            "superseded_by": successor.get(rev), "description": manifest.get("description", ""),
            "prepared_by": prepared.get("name", ""), "prepared_by_id": prepared.get("id", ""),
            "checked_by": checked.get("name", ""), "checked_by_id": checked.get("id", ""),
            "content_hash": manifest.get("content_hash", "")})
    return history


def latest_revision(project_root: Path, calc_number: str) -> str | None:
    revs = ordered_revisions(project_root, calc_number)
    return revs[-1][0] if revs else None


def _refuse_existing(project_root: Path, calc_number: str, revision: str) -> None:
    if not REVISION.match(revision):
        raise ArchiveError(f"revision '{revision}' is not allowed", key="--rev",
                           fix="use 1-16 letters, digits, '.', '_' or '-' (e.g. A, B, P1)")
    folder = revision_folder(project_root, calc_number, revision)
    if folder.exists():
        raise ArchiveError(f"revision {revision} of calc {calc_number} is already issued and is "
                           "never overwritten", file=folder, key="--rev",
                           fix="issue the change as a new revision (e.g. the next letter)")


def _ready(project_root: Path, calc_number: str) -> tuple[Path, str, dict]:
    """Calc file, content hash and valid sign-offs; refuses a calc that is not ready to issue."""
    calc_file = projectfiles.find_calc_file(project_root, calc_number)
    digest = projectfiles.content_hash(calc_file)
    still_open = projectfiles.open_assumptions(projectfiles.read_toml(calc_file))
    if still_open:
        raise ArchiveError(f"calc {calc_number} has open assumptions: {', '.join(still_open)}",
                           file=calc_file, key="assumption.open",
                           fix="confirm them and set open = false (then sign again)")
    status = signoff_status(project_root, calc_number, digest)
    if status["state"] != "checked":
        reasons = status["stale_reason"]
        missing = "checker" if status["state"] == "prepared" else "preparer and checker"
        raise ArchiveError(f"calc {calc_number} lacks a valid {missing} sign-off"
                           + (f" ({reasons})" if reasons else ""), file=calc_file,
                           fix="sign the current content: `calcsheaf sign PROJECT CALC --as "
                               "preparer|checker --person ID`")
    return calc_file, digest, status


def _unlock_both(project_root: Path, status: dict, unlock: Unlock) -> dict[str, PersonKeys]:
    listed = projectfiles.people(project_root)
    keys = {}
    for role in ROLES:
        person_id = status[role]["id"]
        keys[role] = unlock(person_id)
        if keys[role].public_key_b64 != listed[person_id]["public_key"]:
            raise ArchiveError(f"the key on this machine for '{person_id}' is not the one listed "
                               "in project.toml", key="person", fix="use the listed key")
    return keys


def _people_record(project_root: Path, keys: dict[str, PersonKeys]) -> dict:
    listed = projectfiles.people(project_root)
    return {role: dict(listed[k.person_id], chain=[_pem(c) for c in k.chain])
            for role, k in keys.items()}


def _pem(cert) -> str:
    from cryptography.hazmat.primitives import serialization
    return cert.public_bytes(serialization.Encoding.PEM).decode("ascii")


def _default_render() -> Render:
    from calcsheaf.commands.build import build_calc
    return build_calc


def issue(project_root: Path, calc_number: str, revision: str, *, description: str = "",
          render: Render | None = None, unlock: Unlock | None = None) -> Path:
    """Freeze, sign and record revision `revision` of a calc; returns its folder.

    `description` (e.g. "Issued for construction") goes into the signed manifest and the
    site's revision table.
    `render(project_root, calc_number, out_dir, *, status, revision, signoff)` writes the
    calc's index.html, <CALC>.pdf and results.json into out_dir (default: the build's
    build_calc); `unlock(person_id)` returns that person's unlocked keys (default: the key
    file with the passphrase from CALCSHEAF_PASSPHRASE_<ID>, CALCSHEAF_PASSPHRASE or a prompt).
    """
    from .keys import unlock as unlock_from_key_file
    project_root = Path(project_root)
    _refuse_existing(project_root, calc_number, revision)
    calc_file, digest, status = _ready(project_root, calc_number)
    keys = _unlock_both(project_root, status, unlock or unlock_from_key_file)
    base = calc_folder(project_root, calc_number)
    base.mkdir(parents=True, exist_ok=True)
    with _issue_lock(base):
        _refuse_existing(project_root, calc_number, revision)
        for leftover in base.glob(".staging-*"):
            shutil.rmtree(leftover)      # from an interrupted issue; never published
        staging = base / f".staging-{revision}"
        try:
            facts = _stage(project_root, calc_number, revision, staging, calc_file, digest,
                           status, keys, render or _default_render())
            facts["description"] = description
            _seal(staging, facts, keys)
            final = revision_folder(project_root, calc_number, revision)
            os.rename(staging, final)
        finally:
            if staging.exists():
                shutil.rmtree(staging)
    return final


def _issue_lock(base: Path):
    """One issue at a time per calc, so each new revision supersedes the true latest."""
    from filelock import FileLock, Timeout
    lock = FileLock(str(base / ".issue.lock"))
    try:
        lock.acquire(timeout=60)
    except Timeout:
        raise ArchiveError("another issue of this calc is running", file=base / ".issue.lock",
                           fix="wait for it to finish, then issue again") from None
    return _Held(lock)


class _Held:
    def __init__(self, lock) -> None:
        self.lock = lock

    def __enter__(self):
        return self

    def __exit__(self, *exc) -> None:
        self.lock.release()


def _stage(project_root: Path, calc_number: str, revision: str, staging: Path, calc_file: Path,
           digest: str, status: dict, keys: dict[str, PersonKeys], render: Render) -> dict:
    output = staging / "output"
    output.mkdir(parents=True)
    signoff = {k: v for k, v in status.items() if k != "records"}
    render(project_root, calc_number, output, status="issued", revision=revision, signoff=signoff)
    results = _issued_results(output, calc_number)
    pdf = output / f"{calc_number}.pdf"
    if not pdf.is_file():
        raise ArchiveError(f"the build wrote no {pdf.name}", file=output,
                           fix="check the PDF writer (WeasyPrint) works: `calcsheaf build`")
    pdf.write_bytes(sign_issued_pdf(pdf.read_bytes(), keys["preparer"], keys["checker"],
                                    calc=calc_number, revision=revision))
    frozen_calc = staging / "inputs" / "calcs" / calc_file.name
    frozen_calc.parent.mkdir(parents=True)
    shutil.copyfile(calc_file, frozen_calc)
    shutil.copyfile(projectfiles.project_file(project_root), staging / "inputs" / "project.toml")
    if projectfiles.content_hash(frozen_calc) != digest:
        raise ArchiveError("the calc file changed while issuing", file=calc_file,
                           fix="issue again once editing has stopped")
    record = staging / "record"
    record.mkdir()
    (record / "people.json").write_bytes(pretty_json(_people_record(project_root, keys)))
    (record / "signoffs.json").write_bytes(pretty_json(status["records"]))
    previous = ordered_revisions(project_root, calc_number)
    return {
        "project": projectfiles.project_number(project_root), "calc": calc_number,
        "title": results.get("calc", {}).get("title", ""), "revision": revision, "date": today(),
        "content_hash": digest, "calc_file": frozen_calc.relative_to(staging).as_posix(),
        "pdf": pdf.relative_to(staging).as_posix(),
        "prepared_by": {"id": keys["preparer"].person_id, "name": keys["preparer"].name},
        "checked_by": {"id": keys["checker"].person_id, "name": keys["checker"].name},
        "supersedes": ({"revision": previous[-1][0],
                        "manifest_sha256": sha256_bytes(previous[-1][1])} if previous else None),
        "software": {"calcsheaf": __version__}}


def _issued_results(output: Path, calc_number: str) -> dict:
    path = output / "results.json"
    if not path.is_file():
        raise ArchiveError("the build wrote no results.json", file=output,
                           fix="check `calcsheaf build` for this calc")
    results = json.loads(path.read_text(encoding="utf-8"))
    if results.get("passed") is not True:
        failed = [c.get("name", "?") for c in results.get("criteria", []) if not c.get("pass")]
        detail = f" (failing criteria: {', '.join(failed)})" if failed else ""
        raise ArchiveError(f"calc {calc_number} does not pass all its checks{detail}",
                           file=path, key="passed",
                           fix="run `calcsheaf check` and resolve every failing check first")
    return results


def _seal(staging: Path, facts: dict, keys: dict[str, PersonKeys]) -> None:
    manifest_bytes = pretty_json(make_manifest(staging, facts))
    (staging / MANIFEST).write_bytes(manifest_bytes)
    signatures = sign_manifest(manifest_bytes, [(role, keys[role]) for role in ROLES])
    (staging / SIGNATURES).write_bytes(pretty_json(signatures))
