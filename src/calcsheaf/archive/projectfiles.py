"""Light reading of project.toml and calc files for the archive commands.

Only the standard library: signing, issuing checks and verify must not wait for the
analysis stack to import.  The full validating loader lives in calcfile/loader.py.
"""

from __future__ import annotations

import tomllib
from pathlib import Path

from calcsheaf.errors import ArchiveError, InputError

from .canonical import sha256_file

PERSON_FIELDS = ("id", "name", "role", "public_key", "certificate")


def read_toml(path: Path) -> dict:
    """Parse a TOML file; a syntax error becomes an InputError with its line."""
    try:
        return tomllib.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise InputError("file not found", file=path,
                         fix="check the path; a project needs project.toml") from None
    except tomllib.TOMLDecodeError as exc:
        line = getattr(exc, "lineno", None)
        raise InputError(f"not valid TOML ({exc})", file=path, line=line,
                         fix="correct the TOML syntax") from None


def project_file(project_root: Path) -> Path:
    return Path(project_root) / "project.toml"


def project_number(project_root: Path) -> str:
    data = read_toml(project_file(project_root))
    return str(data.get("project", {}).get("number", ""))


def people_from_data(data: dict) -> dict[str, dict]:
    """[[person]] entries of a parsed project.toml, by id, each with every PERSON_FIELDS key."""
    people = {}
    for entry in data.get("person", []) or []:
        if isinstance(entry, dict) and entry.get("id"):
            people[str(entry["id"])] = {k: str(entry.get(k, "")) for k in PERSON_FIELDS}
    return people


def people(project_root: Path) -> dict[str, dict]:
    return people_from_data(read_toml(project_file(project_root)))


def person(project_root: Path, person_id: str) -> dict:
    """One listed person with a public key; refuses unknown ids."""
    listed = people(project_root)
    if person_id not in listed:
        known = ", ".join(sorted(listed)) or "nobody yet"
        raise ArchiveError(f"person '{person_id}' is not listed in project.toml (listed: {known})",
                           file=project_file(project_root), key="person",
                           fix=f"run `calcsheaf keygen --id {person_id} --name NAME --project "
                               f"{project_root}` first")
    entry = listed[person_id]
    if not entry["public_key"]:
        raise ArchiveError(f"person '{person_id}' has no public_key in project.toml",
                           file=project_file(project_root), key="person",
                           fix="run `calcsheaf keygen` for this person")
    return entry


def calc_number_of(path: Path) -> str:
    data = read_toml(path)
    calc = data.get("calc", {})
    return str(calc.get("number", "")) if isinstance(calc, dict) else ""


def find_calc_file(project_root: Path, calc_number: str) -> Path:
    """The calcs/*.toml file whose [calc] number is `calc_number`."""
    calcs = Path(project_root) / "calcs"
    matches = [p for p in sorted(calcs.glob("*.toml")) if calc_number_of(p) == calc_number]
    if not matches:
        raise ArchiveError(f"no calc numbered '{calc_number}' under {calcs}",
                           file=calcs, key="calc.number",
                           fix="give the number from the calc file's [calc] table")
    if len(matches) > 1:
        names = ", ".join(p.name for p in matches)
        raise ArchiveError(f"calc number '{calc_number}' is used by several files: {names}",
                           file=calcs, key="calc.number", fix="give each calc its own number")
    return matches[0]


def content_hash(calc_file: Path) -> str:
    """SHA-256 of the calc file's bytes: what a signature vouches for."""
    return sha256_file(calc_file)


def open_assumptions(calc_data: dict) -> list[str]:
    """Ids (or texts) of [[assumption]] entries still marked open = true."""
    found = []
    for entry in calc_data.get("assumption", []) or []:
        if isinstance(entry, dict) and entry.get("open") is True:
            found.append(str(entry.get("id") or entry.get("text", "?")))
    return found
