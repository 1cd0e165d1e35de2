"""Light reading of project.toml and calc files for the archive commands.

Only the standard library: signing, issuing checks and verify must not wait for the
analysis stack to import.  The full validating loader lives in calcfile/loader.py.
"""

from __future__ import annotations

import tomllib
from pathlib import Path

from calcsheaf import identifiers, person_names as names
from calcsheaf.errors import ArchiveError, InputError

from .canonical import sha256_file

PERSON_FIELDS = ("id", "name", "role", "public_key", "certificate")


def read_toml(path: Path) -> dict:
    """Parse a TOML file; a syntax error becomes an InputError with its line."""
    try:
        data = Path(path).read_bytes()
    except FileNotFoundError:
        raise InputError("file not found", file=path,
                         fix="check the path; a project needs project.toml") from None
    except OSError as exc:
        raise InputError(f"cannot be read ({exc.strerror})", file=path,
                         fix="check the file's permissions") from None
    return parse_toml_bytes(data, path)


def project_file(project_root: Path) -> Path:
    return Path(project_root) / "project.toml"


def project_number(project_root: Path) -> str:
    return project_number_in(read_toml(project_file(project_root)))


def people_from_data(data: dict, path: Path | None = None) -> dict[str, dict]:
    """[[person]] entries of a parsed project.toml, by id, each with every PERSON_FIELDS key.

    The roster is the only source of people's names.  Refused (ArchiveError naming the
    entry): an id that is not a valid person id, an id, a name or a public key that
    appears twice (names compared by names.skeleton: ignoring case, spacing, compatibility
    forms and Cyrillic/Greek look-alikes), since a second entry could otherwise sign under
    the first one's name; a name with invisible or control characters or mixed scripts
    (names.name_problem).
    """
    rows = data.get("person", []) or []
    if not isinstance(rows, list):
        raise ArchiveError("person must be an array of tables", file=path, key="person",
                           fix="write each person under [[person]]")
    people: dict[str, dict] = {}
    seen: dict[tuple[str, str], str] = {}
    for index, entry in enumerate(rows, start=1):
        if not isinstance(entry, dict):
            raise ArchiveError("must be a table", file=path, key=f"person[{index}]",
                               fix="write [[person]] with id, name and public_key")
        person = {k: entry.get(k, "") for k in PERSON_FIELDS}
        bad = [k for k, v in person.items() if not isinstance(v, str)]
        if bad:
            raise ArchiveError(f"{', '.join(bad)} must be text", file=path,
                               key=f"person[{index}].{bad[0]}", fix="put the value in quotes")
        found = identifiers.problem("person id", person["id"])
        if found:
            raise ArchiveError(found, file=path, key=f"person[{index}].id",
                               fix=identifiers.fix("person id"))
        found = names.name_problem(person["name"])
        if found:
            raise ArchiveError(f"the name of person[{index}] ('{person['id']}') {found}",
                               file=path, key=f"person[{index}].name", fix=names.FIX)
        for field in ("id", "name", "public_key"):
            value = same_name(person[field]) if field == "name" else person[field]
            if not value:
                continue
            if (field, value) in seen:
                raise ArchiveError(
                    f"person[{index}] repeats the {field.replace('_', ' ')} of "
                    f"'{seen[(field, value)]}'", file=path, key=f"person[{index}].{field}",
                    fix="each person appears once, with their own id, name and key; remove "
                        "the duplicate [[person]] entry")
            seen[(field, value)] = person["id"]
        people[person["id"]] = person
    return people


def same_name(name: str) -> str:
    """The form in which two names count as the same (names.skeleton: NFKC, case-folded,
    single spaces, Cyrillic and Greek look-alikes of Latin letters folded to them)."""
    return names.skeleton(name)


def people(project_root: Path) -> dict[str, dict]:
    path = project_file(project_root)
    return people_from_data(read_toml(path), path)


def person(project_root: Path, person_id: str) -> dict:
    """One listed person with a public key; refuses unknown ids."""
    identifiers_check("person id", person_id, "--person")
    listed = people(project_root)
    if person_id not in listed:
        known = ", ".join(sorted(listed)) or "nobody yet"
        raise ArchiveError(f"person '{person_id}' is not listed in project.toml (listed: {known})",
                           file=project_file(project_root), key="person",
                           fix=f"run `calcsheaf keygen --id {person_id} --name NAME --project "
                               f"{project_root}` first")
    entry = listed[person_id]
    if not entry["public_key"] or not entry["name"]:
        raise ArchiveError(f"person '{person_id}' has no name or public_key in project.toml",
                           file=project_file(project_root), key="person",
                           fix="run `calcsheaf keygen` for this person")
    return entry


def identifiers_check(kind: str, text, key: str) -> str:
    """An identifier given on the command line, as an ArchiveError when it is not valid."""
    found = identifiers.problem(kind, text)
    if found:
        raise ArchiveError(found, key=key, fix=identifiers.fix(kind))
    return text


def calc_number_in(data: dict) -> str:
    """The [calc] number of parsed calc-file data ("" when absent or not text)."""
    calc = data.get("calc", {})
    number = calc.get("number", "") if isinstance(calc, dict) else ""
    return number if isinstance(number, str) else ""


def calc_number_of(path: Path) -> str:
    return calc_number_in(read_toml(path))


def find_calc_file(project_root: Path, calc_number: str) -> Path:
    """The calcs/*.toml file whose [calc] number is `calc_number` (a valid calc number)."""
    identifiers_check("calc number", calc_number, "calc")
    calcs = Path(project_root) / "calcs"
    real_root = Path(project_root).resolve()
    matches = []
    for path in sorted(calcs.glob("*.toml")):
        if real_root not in path.resolve().parents:
            raise ArchiveError(f"is a link to {path.resolve()}, outside the project", file=path,
                               fix="copy the calc into the project instead of linking to it")
        if calc_number_of(path) == calc_number:
            matches.append(path)
    if not matches:
        raise ArchiveError(f"no calc numbered '{calc_number}' under {calcs}",
                           file=calcs, key="calc.number",
                           fix="give the number from the calc file's [calc] table")
    if len(matches) > 1:
        names = ", ".join(p.name for p in matches)
        raise ArchiveError(f"calc number '{calc_number}' is used by several files: {names}",
                           file=calcs, key="calc.number", fix="give each calc its own number")
    return matches[0]


def read_calc(project_root: Path, calc_number: str) -> tuple[Path, bytes, dict]:
    """(path, bytes, parsed data) of a calc, read once: everything after uses these bytes."""
    path = find_calc_file(project_root, calc_number)
    data = path.read_bytes()
    parsed = parse_toml_bytes(data, path)
    if calc_number_in(parsed) != calc_number:
        raise ArchiveError("the calc file changed while it was read", file=path,
                           key="calc.number", fix="try again once editing has stopped")
    return path, data, parsed


def parse_toml_bytes(data: bytes, path: Path) -> dict:
    """Parse TOML bytes; bad UTF-8 or syntax becomes an InputError with the file."""
    try:
        return tomllib.loads(data.decode("utf-8"))
    except UnicodeDecodeError as exc:
        raise InputError(f"is not UTF-8 text ({exc})", file=path,
                         fix="save the file with UTF-8 encoding") from None
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"not valid TOML ({exc})", file=path,
                         line=getattr(exc, "lineno", None), fix="correct the TOML syntax") from None
    except RecursionError:
        raise InputError("is nested too deeply to read", file=path,
                         fix="flatten the nested arrays or tables") from None


def content_hash(calc_file: Path) -> str:
    """SHA-256 of the calc file's bytes: what a signature vouches for."""
    return sha256_file(calc_file)


def project_number_in(data: dict) -> str:
    block = data.get("project", {})
    number = block.get("number", "") if isinstance(block, dict) else ""
    return number if isinstance(number, str) else ""


def open_assumptions(calc_data: dict) -> list[str]:
    """Ids (or texts) of [[assumption]] entries still marked open = true."""
    found = []
    for entry in calc_data.get("assumption", []) or []:
        if isinstance(entry, dict) and entry.get("open") is True:
            found.append(str(entry.get("id") or entry.get("text", "?")))
    return found
