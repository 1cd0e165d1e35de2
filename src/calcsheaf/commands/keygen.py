"""`calcsheaf keygen`: make (or reuse) a person's keys and list them in project.toml."""

from __future__ import annotations

import getpass
import os
from dataclasses import replace
from pathlib import Path

from calcsheaf import person_names as names
from calcsheaf.archive import keys as K
from calcsheaf.archive.roster import add_person
from calcsheaf.archive.verify import fingerprint
from calcsheaf.errors import ArchiveError


def keygen(name: str, person_id: str, project: Path, *, role: str = "",
           pkcs12: Path | None = None) -> int:
    """Create the person's key file in the user's config folder (or reuse the one there),
    then append the person's public key and certificate to PROJECT/project.toml."""
    project = Path(project)
    _check_name(name)
    if not (project / "project.toml").is_file():
        raise ArchiveError("no project.toml here", file=project / "project.toml",
                           fix="give the project folder with --project")
    path = K.key_path(person_id)
    if path.exists():
        if pkcs12 is not None:
            raise ArchiveError(f"a key file for '{person_id}' already exists", file=path,
                               fix="move it away to import a PKCS#12 file instead")
        person = replace(K.unlock(person_id), name=name)
        print(f"Using the existing key of {person_id}: {path}")
    else:
        bundle = K.load_pkcs12(pkcs12, _pkcs12_password(pkcs12)) if pkcs12 else None
        person = K.generate(person_id, name, pkcs12_bundle=bundle)
        passphrase = K.get_passphrase(person_id, name, confirm=True)
        path = K.save(person, passphrase, log2n=K.kdf_log2n_from_env())
        print(f"Wrote the encrypted key file of {name} ({person_id}): {path}")
    added = add_person(project, person, role)
    who = fingerprint({"public_key": person.public_key_b64})
    print(("Added" if added else "Already listed:") +
          f" {person.name} ({person_id}) in {project / 'project.toml'}, public key {who}")
    return 0


def _check_name(name: str) -> None:
    """Refuse a name that is empty, too long for the certificate, or that names.name_problem
    refuses (invisible or control characters, mixed scripts)."""
    if not name.strip():
        raise ArchiveError("the name is empty", key="--name",
                           fix='give the person\'s full name, e.g. --name "Alice Able"')
    if len(name) > names.MAX_LENGTH:
        raise ArchiveError(f"the name is {len(name)} characters long; a certificate holds at "
                           f"most {names.MAX_LENGTH}", key="--name",
                           fix=f"shorten it to {names.MAX_LENGTH} characters or fewer")
    problem = names.name_problem(name)
    if problem:
        raise ArchiveError(f"the name {name!r} {problem}", key="--name", fix=names.FIX)


def _pkcs12_password(path: Path) -> str:
    return os.environ.get("CALCSHEAF_PKCS12_PASSPHRASE") or getpass.getpass(
        f"Password of {path}: ")
