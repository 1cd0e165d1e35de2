"""The manifest of an issued revision: SHA-256 of every file, signed with Ed25519.

`MANIFEST.json` lists every file of the revision folder (POSIX paths, sorted) with its
SHA-256 and the revision's facts; `MANIFEST.sig.json` holds detached Ed25519 signatures
over the exact bytes of `MANIFEST.json` by the preparer and by the checker.
"""

from __future__ import annotations

import json
from pathlib import Path

from cryptography.exceptions import InvalidSignature

from calcsheaf.errors import ArchiveError

from .canonical import b64, sha256_bytes, sha256_file, unb64
from .keys import PersonKeys, load_public_key

MANIFEST = "MANIFEST.json"
SIGNATURES = "MANIFEST.sig.json"
FORMAT = "calcsheaf-manifest-1"
SIG_FORMAT = "calcsheaf-manifest-signatures-1"

Row = tuple[str, bool, str]


def folder_files(folder: Path) -> dict[str, str]:
    """relative POSIX path -> SHA-256 of every file under `folder` except the manifest pair."""
    found = {}
    for path in sorted(Path(folder).rglob("*")):
        rel = path.relative_to(folder).as_posix()
        if path.is_symlink():
            found[rel] = "(a symbolic link, never part of an issued revision)"
        elif path.is_file() and rel not in (MANIFEST, SIGNATURES):
            found[rel] = sha256_file(path)
    return found


def make_manifest(folder: Path, facts: dict) -> dict:
    return dict(facts, format=FORMAT, files=folder_files(folder))


def compare_files(recorded: dict[str, str], actual: dict[str, str]) -> list[Row]:
    """One row per recorded or present file: unchanged, changed, missing, added or renamed."""
    rows: list[Row] = []
    missing = {p: h for p, h in recorded.items() if p not in actual}
    added = {p: h for p, h in actual.items() if p not in recorded}
    renamed_to = {}
    for old, digest in missing.items():
        for new, new_digest in added.items():
            if new_digest == digest and new not in renamed_to.values():
                renamed_to[old] = new
                break
    for path in sorted(set(recorded) | set(actual)):
        if path in recorded and path in actual:
            same = recorded[path] == actual[path]
            rows.append((f"file {path}", same, "SHA-256 matches" if same else
                         f"content changed: SHA-256 {actual[path][:16]}..., manifest says "
                         f"{recorded[path][:16]}..."))
        elif path in renamed_to:
            rows.append((f"file {path}", False, f"renamed to {renamed_to[path]}"))
        elif path in missing:
            rows.append((f"file {path}", False, "listed in the manifest but missing"))
        elif path not in renamed_to.values():
            rows.append((f"file {path}", False, "not listed in the manifest (file added)"))
    return rows


def sign_manifest(manifest_bytes: bytes, signers: list[tuple[str, PersonKeys]]) -> dict:
    return {"format": SIG_FORMAT, "manifest_sha256": sha256_bytes(manifest_bytes),
            "signatures": [{"role": role, "person": keys.person_id,
                            "public_key": keys.public_key_b64,
                            "signature": b64(keys.ed25519.sign(manifest_bytes))}
                           for role, keys in signers]}


def check_manifest_signatures(manifest_bytes: bytes, signatures: dict,
                              people: dict[str, dict]) -> list[Row]:
    """Each of preparer and checker signed these exact bytes with their recorded key.

    `people` maps role -> recorded person (id, public_key, ...).  A signature by any key
    that is not a recorded one fails.
    """
    rows: list[Row] = []
    listed = signatures.get("signatures", []) if isinstance(signatures, dict) else []
    entries = [e for e in listed if isinstance(e, dict)] if isinstance(listed, list) else []
    recorded_keys = {p.get("public_key") for p in people.values()}
    for entry in entries:
        if entry.get("public_key") not in recorded_keys:
            rows.append(("manifest signature", False,
                         f"signed by a key not recorded for this revision (person "
                         f"'{entry.get('person', '?')}', key {str(entry.get('public_key', ''))[:16]}...)"))
    for role, who in sorted(people.items()):
        item = f"manifest signature ({role})"
        match = [e for e in entries if e.get("role") == role]
        if len(match) != 1:
            rows.append((item, False, f"expected one {role} signature, found {len(match)}"))
            continue
        entry = match[0]
        if entry.get("public_key") != who.get("public_key"):
            rows.append((item, False, f"made with a key other than {who.get('id')}'s recorded key"))
            continue
        try:
            load_public_key(who["public_key"]).verify(unb64(entry["signature"]), manifest_bytes)
        except (InvalidSignature, ValueError, KeyError, TypeError, AttributeError, ArchiveError):
            rows.append((item, False, "Ed25519 signature does not match MANIFEST.json "
                         "(the manifest was edited or the signature replaced)"))
            continue
        rows.append((item, True, f"Ed25519 signature by {who.get('name') or who.get('id')} valid"))
    return rows


def parse_json(data: bytes):
    """JSON from a revision folder; ValueError (never RecursionError) when it is not JSON
    or is nested too deep to read."""
    try:
        return json.loads(data)
    except RecursionError:
        raise ValueError("nested too deeply to read") from None


def read_manifest(folder: Path) -> tuple[bytes, dict]:
    """The exact bytes of a folder's MANIFEST.json and their JSON (ValueError if not JSON)."""
    data = (Path(folder) / MANIFEST).read_bytes()
    return data, parse_json(data)
