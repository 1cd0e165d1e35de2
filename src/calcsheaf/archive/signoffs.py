"""Sign-offs: a preparer's and a checker's Ed25519 signature over a calc's content hash.

Each signature covers a canonical statement (project, calc number, calc file, role,
person, the person's name as project.toml lists it, SHA-256 of the calc file's bytes,
date, and `after`: the SHA-256 of the latest issued revision's manifest when signing, ""
before the first issue; the checker's statement also names the preparer).  `after` ties a
sign-off to its place in the revision history, so an old sign-off replayed after a later
issue does not count.  Names come from the project's roster only, never from a key file.  They live in `PROJECT/signoffs/<CALC>.json`.  Editing the calc file changes its
hash, so earlier signatures go stale and the calc is a plain draft again.
"""

from __future__ import annotations

import json
from pathlib import Path

from cryptography.exceptions import InvalidSignature

from calcsheaf.errors import ArchiveError

from . import projectfiles
from .canonical import (b64, canonical_json, pretty_json, sha256_bytes, today, unb64,
                        write_atomic)
from .keys import PersonKeys, load_public_key

ROLES = ("preparer", "checker")
STATEMENT_FORMAT = "calcsheaf-signoff-1"
FILE_FORMAT = "calcsheaf-signoffs-1"


def signoff_file(project_root: Path, calc_number: str) -> Path:
    projectfiles.identifiers_check("calc number", calc_number, "calc")
    return Path(project_root) / "signoffs" / f"{calc_number}.json"


def make_statement(*, project: str, calc: str, calc_file: str, role: str, person: str,
                   name: str, content_hash: str, date: str, after: str,
                   preparer: str = "") -> dict:
    statement = {"format": STATEMENT_FORMAT, "project": project, "calc": calc,
                 "calc_file": calc_file, "role": role, "person": person, "name": name,
                 "content_hash": content_hash, "date": date, "after": after}
    if role == "checker":
        statement["preparer"] = preparer
    return statement


def sign_statement(keys: PersonKeys, statement: dict) -> dict:
    return {"statement": statement,
            "signature": b64(keys.ed25519.sign(canonical_json(statement)))}


def signature_problem(record: dict, public_key: str) -> str | None:
    """None when `record`'s signature verifies under `public_key`, else why not."""
    try:
        load_public_key(public_key).verify(unb64(record["signature"]),
                                           canonical_json(record["statement"]))
    except (InvalidSignature, KeyError, ValueError, TypeError, AttributeError, ArchiveError):
        statement = record.get("statement")
        who = statement.get("person", "?") if isinstance(statement, dict) else "?"
        return f"signature does not verify with the public key listed for '{who}'"
    return None


def load_records(project_root: Path, calc_number: str) -> dict[str, dict]:
    path = signoff_file(project_root, calc_number)
    if not path.exists():
        return {}
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except (ValueError, UnicodeDecodeError) as exc:
        raise ArchiveError(f"is not a sign-off file ({exc})", file=path,
                           fix="delete it and sign again") from None
    found = data.get("signoffs", {}) if isinstance(data, dict) else None
    if not isinstance(found, dict):
        raise ArchiveError("is not a sign-off file (no signoffs table)", file=path,
                           fix="delete it and sign again")
    return {role: rec for role, rec in found.items()
            if role in ROLES and isinstance(rec, dict) and isinstance(rec.get("statement"), dict)}


def _save_records(project_root: Path, calc_number: str, records: dict[str, dict]) -> Path:
    path = signoff_file(project_root, calc_number)
    write_atomic(path, pretty_json({"format": FILE_FORMAT, "calc": calc_number,
                                    "signoffs": records}))
    return path


def _who(statement: dict, people: dict) -> dict:
    """id, name (from the roster) and date of a signed statement."""
    person_id = str(statement.get("person", ""))
    listed = people.get(person_id, {})
    return {"id": person_id, "name": listed.get("name") or person_id,
            "date": str(statement.get("date", ""))}


def _stale_reason(statement: dict, content_hash: str, name: str) -> str | None:
    if statement.get("content_hash") != content_hash:
        return (f"the calc file changed after {name} "
                f"signed as {statement['role']} on {statement.get('date')} (signed content "
                f"{str(statement.get('content_hash', ''))[:12]}, now {content_hash[:12]})")
    return None


def history_point(project_root: Path, calc_number: str, content_hash: str) -> set[str]:
    """The `after` values a sign-off of this content may carry to count now.

    The latest issued revision's manifest SHA-256 (a draft following it: "" before the
    first issue), and for the content of the latest revision itself, the manifest it
    superseded (the sign-offs that issued it).
    """
    from .layout import ordered_revisions
    revs = ordered_revisions(project_root, calc_number)
    if not revs:
        return {""}
    rev, data, manifest = revs[-1]
    allowed = {sha256_bytes(data)}
    if manifest.get("content_hash") == content_hash:
        allowed.add((manifest.get("supersedes") or {}).get("manifest_sha256") or "")
    return allowed


def signoff_status(project_root: Path, calc_number: str, content_hash: str) -> dict:
    """Who has validly prepared and checked this content, and why other signatures do not count.

    Returns, for the build's title block and sign-off panel:
      state: "unsigned" | "prepared" | "checked"
      prepared_by, prepared_date, checked_by, checked_date: names and ISO dates ("" if none)
      stale: [{role, id, name, date, reason}], signatures that no longer count
      stale_reason: their reasons joined by "; " ("" if none)
    and for the archive: preparer / checker ({id, name, date} or None) and records
    ({role: signed record}, valid ones only).
    """
    people = projectfiles.people(project_root)
    records = load_records(project_root, calc_number)
    context = {"calc": calc_number, "content_hash": content_hash,
               "project": projectfiles.project_number(project_root),
               "after": history_point(project_root, calc_number, content_hash)}
    valid, stale = {}, []
    for role in ROLES:
        record = records.get(role)
        if record is None:
            continue
        statement = record["statement"]
        reason = _record_problem(record, role, context, people, valid)
        if reason:
            stale.append(dict(_who(statement, people), role=role, reason=reason))
        else:
            valid[role] = record
    who = {role: _who(valid[role]["statement"], people) if role in valid else None
           for role in ROLES}
    state = "checked" if who["checker"] else "prepared" if who["preparer"] else "unsigned"
    return {"state": state,
            "prepared_by": (who["preparer"] or {}).get("name", ""),
            "prepared_date": (who["preparer"] or {}).get("date", ""),
            "checked_by": (who["checker"] or {}).get("name", ""),
            "checked_date": (who["checker"] or {}).get("date", ""),
            "stale": stale, "stale_reason": "; ".join(s["reason"] for s in stale),
            "preparer": who["preparer"], "checker": who["checker"], "records": valid}


def _record_problem(record: dict, role: str, context: dict, people: dict,
                    valid: dict) -> str | None:
    """Why a stored sign-off does not count for this content now (None when it does)."""
    statement = record["statement"]
    person_id = statement.get("person", "")
    if statement.get("role") != role or statement.get("calc") != context["calc"]:
        return "the signed statement is for another calc or role"
    if statement.get("project") != context["project"]:
        return f"the signed statement is for project {statement.get('project')!r}"
    if person_id not in people:
        return f"'{person_id}' is no longer listed in project.toml"
    problem = signature_problem(record, people[person_id]["public_key"])
    if problem:
        return problem
    name = people[person_id]["name"]
    if statement.get("name") != name:
        return (f"signed under the name {statement.get('name')!r}, but project.toml lists "
                f"'{person_id}' as {name!r}")
    stale = _stale_reason(statement, context["content_hash"], name)
    if stale:
        return stale
    if statement.get("after", None) not in context["after"]:
        return ("signed at another point of the revision history (before the latest issue, "
                "or for a revision that was since replaced)")
    if role == "checker":
        preparer = valid.get("preparer")
        if preparer is None or preparer["statement"]["person"] != statement.get("preparer"):
            return "the preparer's sign-off it checked is no longer valid"
        if person_id == preparer["statement"]["person"]:
            return "the checker is the same person as the preparer"
    return None


def sign(project_root: Path, calc_number: str, role: str, keys: PersonKeys) -> dict:
    """Sign the calc's current content as `role`; returns the stored record.

    Refuses: unknown role, a key that is not the one listed for the person, a checker
    without a valid preparer sign-off, and one person taking both roles.
    """
    if role not in ROLES:
        raise ArchiveError(f"role '{role}' is not known", key="--as",
                           fix="use --as preparer or --as checker")
    from .layout import refuse_links
    refuse_links(project_root, calc_number)
    listed = projectfiles.person(project_root, keys.person_id)
    if listed["public_key"] != keys.public_key_b64:
        raise ArchiveError(f"the key on this machine for '{keys.person_id}' is not the one "
                           "listed in project.toml", file=projectfiles.project_file(project_root),
                           key="person", fix="sign with the key that keygen listed for you")
    calc_file, data, _ = projectfiles.read_calc(project_root, calc_number)
    digest = sha256_bytes(data)
    status = signoff_status(project_root, calc_number, digest)
    preparer = status["preparer"]
    _refuse_role_clash(role, keys.person_id, status, calc_number)
    statement = make_statement(
        project=projectfiles.project_number(project_root), calc=calc_number,
        calc_file=calc_file.relative_to(project_root).as_posix(), role=role,
        person=keys.person_id, name=listed["name"], content_hash=digest, date=today(),
        after=latest_manifest_sha(project_root, calc_number),
        preparer=preparer["id"] if preparer else "")
    records = load_records(project_root, calc_number)
    records[role] = sign_statement(keys, statement)
    _save_records(project_root, calc_number, records)
    return records[role]


def latest_manifest_sha(project_root: Path, calc_number: str) -> str:
    """SHA-256 of the latest issued revision's MANIFEST.json ("" before the first issue)."""
    from .layout import ordered_revisions
    revs = ordered_revisions(project_root, calc_number)
    return sha256_bytes(revs[-1][1]) if revs else ""


def _refuse_role_clash(role: str, person_id: str, status: dict, calc_number: str) -> None:
    preparer, checker = status["preparer"], status["checker"]
    if role == "checker":
        if preparer is None:
            raise ArchiveError(f"calc {calc_number} has no valid preparer sign-off to check",
                               key="--as", fix="the preparer signs first: "
                               f"`calcsheaf sign PROJECT {calc_number} --as preparer --person ID`")
        if preparer["id"] == person_id:
            raise ArchiveError(f"'{person_id}' prepared calc {calc_number} and cannot also "
                               "check it", key="--person",
                               fix="a different person must sign as checker")
    elif checker is not None and checker["id"] == person_id:
        raise ArchiveError(f"'{person_id}' checked calc {calc_number} and cannot also prepare "
                           "it", key="--person", fix="a different person must sign as preparer")
