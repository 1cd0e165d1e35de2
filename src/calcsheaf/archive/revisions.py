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
import shutil
from dataclasses import replace
from pathlib import Path
from typing import Callable

from calcsheaf import __version__, identifiers
from calcsheaf.errors import ArchiveError, CalcsheafError

from . import projectfiles
from .canonical import pretty_json, sha256_bytes, today
from .keys import PersonKeys
from .manifest import MANIFEST, SIGNATURES, make_manifest, sign_manifest
from .pdfsign import sign_issued_pdf
from .layout import _manifests, calc_folder, ordered_revisions, refuse_links, revision_folder
from .signoffs import ROLES, latest_manifest_sha, signoff_status

Render = Callable[..., Path]   # see issue()
Unlock = Callable[[str], PersonKeys]


def revision_history(project_root: Path, calc_number: str) -> list[dict]:
    """Every revision folder of the calc, oldest first, for the site's revision table.

    Each: rev, date, status ("issued" | "superseded" | "NOT VERIFIED: <reason>"),
    superseded_by (rev or None), description, prepared_by and checked_by (names from the
    project's roster by person id), prepared_by_id, checked_by_id, content_hash (SHA-256
    of the calc file issued), verified (bool).  A revision counts as issued only when its
    manifest signatures, sign-offs and recorded keys check (verify.revision_problem); one
    that does not is never shown as issued, never supersedes and is never served.
    """
    from .verify import revision_problem
    revs = ordered_revisions(project_root, calc_number)
    problems = {rev: revision_problem(revision_folder(project_root, calc_number, rev),
                                      Path(project_root)) for rev, _, _ in revs}
    successor = {(m.get("supersedes") or {}).get("revision"): rev for rev, _, m in revs
                 if problems[rev] is None}
    roster = _roster_names(project_root)
    return [_history_row(rev, manifest, problems[rev], successor.get(rev), roster)
            for rev, _, manifest in revs]


def _roster_names(project_root: Path) -> dict[str, str]:
    try:
        return {pid: p["name"] for pid, p in projectfiles.people(project_root).items()}
    except CalcsheafError:      # an unreadable roster: every revision fails its check anyway
        return {}


def _history_row(rev: str, manifest: dict, problem: str | None, successor: str | None,
                 roster: dict[str, str]) -> dict:
    prepared, checked = manifest.get("prepared_by") or {}, manifest.get("checked_by") or {}
    verified = problem is None
    pid, cid = str(prepared.get("id", "")), str(checked.get("id", ""))
    return {
        "rev": rev, "date": manifest.get("date", "") if verified else "",
        "status": ("superseded" if successor else "issued") if verified
        else f"NOT VERIFIED: {problem}",
        "superseded_by": successor, "verified": verified,
        "description": manifest.get("description", "") if verified else "",
        "prepared_by": roster.get(pid, "") if verified else "", "prepared_by_id": pid,
        "checked_by": roster.get(cid, "") if verified else "", "checked_by_id": cid,
        "content_hash": manifest.get("content_hash", "")}


def verified_history(project_root: Path, calc_number: str) -> list[dict]:
    """revision_history without the revisions that do not verify."""
    return [h for h in revision_history(project_root, calc_number) if h["verified"]]


def issued_file(project_root: Path, calc_number: str, revision: str, rel: str) -> bytes | None:
    """A file of an issued revision, refused unless it matches its manifest; None when the
    manifest lists no such file."""
    from .verify import revision_problem
    folder = revision_folder(project_root, calc_number, revision)
    _, manifest = _manifests(project_root, calc_number)[revision]
    problem = revision_problem(folder, Path(project_root))
    if problem:
        raise ArchiveError(f"revision {revision} of calc {calc_number} does not verify "
                           f"({problem}); it is never served as issued", file=folder,
                           fix=f"run `calcsheaf verify {folder}` and restore the revision from "
                               "the archive (or remove a folder that was never issued)")
    if rel not in manifest["files"]:
        return None
    path = folder / rel
    data = path.read_bytes() if path.is_file() and not path.is_symlink() else b""
    if manifest["files"][rel] != sha256_bytes(data):
        raise ArchiveError("this file of an issued revision is missing or does not match its "
                           "manifest", file=path,
                           fix=f"run `calcsheaf verify {folder}` and restore the revision from "
                               "the archive")
    return data


def issued_pdf(project_root: Path, calc_number: str, revision: str) -> bytes:
    """The signed PDF of an issued revision (checked against its manifest)."""
    data = issued_file(project_root, calc_number, revision, f"output/{calc_number}.pdf")
    if data is None:
        raise ArchiveError("the issued revision lists no signed PDF",
                           file=revision_folder(project_root, calc_number, revision),
                           fix="run `calcsheaf verify` on it and restore it from the archive")
    return data


def issued_changes(project_root: Path, calc_number: str, revision: str) -> dict | None:
    """The changes since the previous issue that the revision's signed pages show (from its
    output/render.json), or None when it shows none or predates render.json."""
    data = issued_file(project_root, calc_number, revision, "output/render.json")
    try:
        changes = json.loads(data).get("changes") if data else None
    except (ValueError, AttributeError):
        changes = None
    return changes if isinstance(changes, dict) else None


def latest_revision(project_root: Path, calc_number: str) -> str | None:
    revs = ordered_revisions(project_root, calc_number)
    return revs[-1][0] if revs else None


def check_new_revision(project_root: Path, calc_number: str, revision: str) -> None:
    """Refuse a revision that is not a valid identifier, is issued already, or does not go
    forward from the latest issued revision (identifiers.revision_key order)."""
    projectfiles.identifiers_check("calc number", calc_number, "calc")
    projectfiles.identifiers_check("revision", revision, "--rev")
    folder = revision_folder(project_root, calc_number, revision)
    if folder.exists():
        raise ArchiveError(f"revision {revision} of calc {calc_number} is already issued and is "
                           "never overwritten", file=folder, key="--rev",
                           fix="issue the change as a new revision (e.g. the next letter)")
    _refuse_unverified(project_root, calc_number)
    latest = latest_revision(project_root, calc_number)
    if latest is not None and identifiers.revision_key(revision) <= identifiers.revision_key(latest):
        raise ArchiveError(f"revision {revision} does not come after the latest issued revision "
                           f"{latest} of calc {calc_number}", key="--rev",
                           fix=f"revisions go forward: use {identifiers.next_revision(latest)}")


def _refuse_unverified(project_root: Path, calc_number: str) -> None:
    """A new revision supersedes the latest one, so every existing one must verify first."""
    from .verify import revision_problem
    for rev, _, _ in ordered_revisions(project_root, calc_number):
        folder = revision_folder(project_root, calc_number, rev)
        problem = revision_problem(folder, Path(project_root))
        if problem:
            raise ArchiveError(f"revision {rev} of calc {calc_number} does not verify "
                               f"({problem}), so no revision can supersede it", file=folder,
                               fix=f"run `calcsheaf verify {folder}`; restore it from the "
                                   "archive, or remove a folder that was never issued")


def _ready(project_root: Path, calc_number: str) -> tuple[Path, bytes, dict]:
    """Calc file, its bytes (read once) and valid sign-offs; refuses a calc not ready to issue."""
    calc_file, data, parsed = projectfiles.read_calc(project_root, calc_number)
    digest = sha256_bytes(data)
    still_open = projectfiles.open_assumptions(parsed)
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
    after = latest_manifest_sha(project_root, calc_number)
    if any(r["statement"].get("after") != after for r in status["records"].values()):
        raise ArchiveError(f"the sign-offs of calc {calc_number} were made for the revision "
                           "already issued, not for a new one", file=calc_file,
                           fix="both people sign again to issue this content as a new revision")
    return calc_file, data, status


def _unlock_both(listed: dict, status: dict, unlock: Unlock) -> dict[str, PersonKeys]:
    """Both signers' keys; the names on them are the roster's (a key file's name is ignored)."""
    keys = {}
    for role in ROLES:
        person_id = status[role]["id"]
        named = status["records"][role]["statement"].get("name")
        if person_id not in listed or named != listed[person_id]["name"]:
            raise ArchiveError("project.toml changed while issuing", key="person",
                               fix="issue again once editing has stopped")
        unlocked = unlock(person_id)
        if unlocked.public_key_b64 != listed[person_id]["public_key"]:
            raise ArchiveError(f"the key on this machine for '{person_id}' is not the one listed "
                               "in project.toml", key="person", fix="use the listed key")
        keys[role] = replace(unlocked, name=listed[person_id]["name"])
    return keys


def _people_record(listed: dict, keys: dict[str, PersonKeys]) -> dict:
    return {role: dict(listed[k.person_id], chain=[_pem(c) for c in k.chain])
            for role, k in keys.items()}


def _pem(cert) -> str:
    from cryptography.hazmat.primitives import serialization
    return cert.public_bytes(serialization.Encoding.PEM).decode("ascii")


def pending_history(project_root: Path, calc_number: str, revision: str, description: str,
                    keys: dict[str, PersonKeys], digest: str) -> list[dict]:
    """The revision history as it will read once `revision` is issued (for its own sheets):
    the latest revision marked superseded by it, and it as the issued one."""
    history = verified_history(project_root, calc_number)
    if history:
        history[-1] = dict(history[-1], status="superseded", superseded_by=revision)
    history.append({
        "rev": revision, "date": today(), "status": "issued", "superseded_by": None,
        "verified": True,
        "description": description,
        "prepared_by": keys["preparer"].name, "prepared_by_id": keys["preparer"].person_id,
        "checked_by": keys["checker"].name, "checked_by_id": keys["checker"].person_id,
        "content_hash": digest})
    return history


def issue(project_root: Path, calc_number: str, revision: str, *, render: Render,
          description: str = "", unlock: Unlock | None = None) -> Path:
    """Freeze, sign and record revision `revision` of a calc; returns its folder.

    The calc file and project.toml are each read once; those bytes are hashed, frozen into
    the revision folder first, and `render` analyses and renders the frozen copy, so what
    is signed is exactly what was analysed.  `description` (e.g. "Issued for
    construction") goes into the signed manifest and the revision tables.
    `render(frozen_calc, project_root, out_dir, *, calc_number, status, revision, signoff,
    history)` writes index.html, <CALC>.pdf and results.json into out_dir;
    `unlock(person_id)` returns that person's unlocked keys (default: the key file with the
    passphrase from CALCSHEAF_PASSPHRASE_<ID>, CALCSHEAF_PASSPHRASE or a prompt).
    """
    from .keys import unlock as unlock_from_key_file
    project_root = Path(project_root)
    refuse_links(project_root, calc_number)
    check_new_revision(project_root, calc_number, revision)
    base = calc_folder(project_root, calc_number)
    base.mkdir(parents=True, exist_ok=True)
    with _issue_lock(base):
        refuse_links(project_root, calc_number)
        check_new_revision(project_root, calc_number, revision)
        calc_file, calc_bytes, status = _ready(project_root, calc_number)
        project_toml = projectfiles.project_file(project_root)
        project_bytes = project_toml.read_bytes()
        listed = projectfiles.people_from_data(
            projectfiles.parse_toml_bytes(project_bytes, project_toml), project_toml)
        keys = _unlock_both(listed, status, unlock or unlock_from_key_file)
        _remove_own_leftovers(base)
        staging = _new_staging(base, revision)
        try:
            inputs = _freeze_inputs(staging, calc_file.name, calc_bytes, project_bytes)
            history = pending_history(project_root, calc_number, revision, description, keys,
                                      inputs["digest"])
            facts = _stage(project_root, calc_number, revision, staging, inputs, status, keys,
                           render, history)
            facts["description"] = description
            (staging / STAGING_MARKER).unlink()
            _seal(staging, facts, keys, _people_record(listed, keys), status["records"])
            final = revision_folder(project_root, calc_number, revision)
            os.rename(staging, final)
        finally:
            if staging.exists():
                shutil.rmtree(staging)
    return final


STAGING_MARKER = ".calcsheaf-staging"


def _remove_own_leftovers(base: Path) -> None:
    """Remove the staging folders of interrupted issues: only real folders that carry the
    marker an issue writes into its own staging folder (never a link, never another's)."""
    for leftover in sorted(base.glob(".staging-*")):
        marker = leftover / STAGING_MARKER
        if leftover.is_dir() and not leftover.is_symlink() and marker.is_file() \
                and not marker.is_symlink():
            shutil.rmtree(leftover)      # from an interrupted issue; never published


def _new_staging(base: Path, revision: str) -> Path:
    """A new, empty staging folder of this issue, marked as made by it."""
    staging = base / f".staging-{revision}"
    try:
        staging.mkdir()
    except FileExistsError:
        raise ArchiveError("a folder of this name, not made by an issue, is in the way",
                           file=staging, fix="move it out of issued/, then issue again") from None
    (staging / STAGING_MARKER).write_bytes(b"")
    return staging


def _freeze_inputs(staging: Path, calc_name: str, calc_bytes: bytes,
                   project_bytes: bytes) -> dict:
    """Write the bytes read once into staging/inputs; returns the frozen calc, hash, project."""
    frozen_calc = staging / "inputs" / "calcs" / calc_name
    frozen_calc.parent.mkdir(parents=True)
    frozen_calc.write_bytes(calc_bytes)
    (staging / "inputs" / "project.toml").write_bytes(project_bytes)
    return {"calc_file": frozen_calc, "digest": sha256_bytes(calc_bytes),
            "project": projectfiles.project_number_in(
                projectfiles.parse_toml_bytes(project_bytes, staging / "inputs" / "project.toml"))}


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


def _stage(project_root: Path, calc_number: str, revision: str, staging: Path, inputs: dict,
           status: dict, keys: dict[str, PersonKeys], render: Render,
           history: list[dict]) -> dict:
    output = staging / "output"
    output.mkdir(parents=True)
    signoff = {k: v for k, v in status.items() if k != "records"}
    frozen_calc = inputs["calc_file"]
    render(frozen_calc, project_root, output, calc_number=calc_number, status="issued",
           revision=revision, signoff=signoff, history=history)
    if projectfiles.content_hash(frozen_calc) != inputs["digest"]:
        raise ArchiveError("the frozen calc file changed while issuing", file=frozen_calc,
                           fix="issue again; nothing may write into issued/ meanwhile")
    results = _issued_results(output, calc_number, revision)
    pdf = output / f"{calc_number}.pdf"
    if not pdf.is_file():
        raise ArchiveError(f"the build wrote no {pdf.name}", file=output,
                           fix="check the PDF writer (WeasyPrint) works: `calcsheaf build`")
    pdf.write_bytes(sign_issued_pdf(pdf.read_bytes(), keys["preparer"], keys["checker"],
                                    calc=calc_number, revision=revision))
    previous = ordered_revisions(project_root, calc_number)
    return {
        "project": inputs["project"], "calc": calc_number,
        "title": results.get("calc", {}).get("title", ""), "revision": revision, "date": today(),
        "content_hash": inputs["digest"],
        "calc_file": frozen_calc.relative_to(staging).as_posix(),
        "pdf": pdf.relative_to(staging).as_posix(),
        "prepared_by": {"id": keys["preparer"].person_id, "name": keys["preparer"].name},
        "checked_by": {"id": keys["checker"].person_id, "name": keys["checker"].name},
        "supersedes": ({"revision": previous[-1][0],
                        "manifest_sha256": sha256_bytes(previous[-1][1])} if previous else None),
        "software": {"calcsheaf": __version__}}


def _issued_results(output: Path, calc_number: str, revision: str) -> dict:
    path = output / "results.json"
    if not path.is_file():
        raise ArchiveError("the build wrote no results.json", file=output,
                           fix="check `calcsheaf build` for this calc")
    results = json.loads(path.read_text(encoding="utf-8"))
    named = results.get("calc", {}) if isinstance(results, dict) else {}
    if (named.get("number"), named.get("revision")) != (calc_number, revision):
        raise ArchiveError(f"the rendered results are of calc {named.get('number')} revision "
                           f"{named.get('revision')}, not {calc_number} {revision}", file=path,
                           fix="report this: the renderer did not use the frozen calc file")
    if results.get("passed") is not True:
        failed = [c.get("name", "?") for c in results.get("criteria", []) if not c.get("pass")]
        detail = f" (failing criteria: {', '.join(failed)})" if failed else ""
        raise ArchiveError(f"calc {calc_number} does not pass all its checks{detail}",
                           file=path, key="passed",
                           fix="run `calcsheaf check` and resolve every failing check first")
    return results


def _seal(staging: Path, facts: dict, keys: dict[str, PersonKeys], people: dict,
          records: dict) -> None:
    record = staging / "record"
    record.mkdir()
    (record / "people.json").write_bytes(pretty_json(people))
    (record / "signoffs.json").write_bytes(pretty_json(records))
    manifest_bytes = pretty_json(make_manifest(staging, facts))
    (staging / MANIFEST).write_bytes(manifest_bytes)
    signatures = sign_manifest(manifest_bytes, [(role, keys[role]) for role in ROLES])
    (staging / SIGNATURES).write_bytes(pretty_json(signatures))
