"""Adding a person to project.toml by appending hand-formatted TOML.

The user's text and comments are kept byte for byte; the new [[person]] table goes at the
end.  Only public material is written: name, id, role, Ed25519 public key, certificate.
"""

from __future__ import annotations

import tomllib
from pathlib import Path

from calcsheaf.errors import ArchiveError

from .keys import PersonKeys
from .projectfiles import people_from_data, project_file, read_toml

_ESCAPES = {"\\": "\\\\", '"': '\\"', "\b": "\\b", "\t": "\\t", "\n": "\\n", "\f": "\\f",
            "\r": "\\r"}


def toml_string(text: str) -> str:
    """A TOML basic string literal for `text`."""
    out = []
    for char in text:
        if char in _ESCAPES:
            out.append(_ESCAPES[char])
        elif ord(char) < 0x20 or ord(char) == 0x7F:
            out.append(f"\\u{ord(char):04X}")
        else:
            out.append(char)
    return '"' + "".join(out) + '"'


def person_block(keys: PersonKeys, role: str = "") -> str:
    """The [[person]] table for `keys`, starting with a blank line."""
    lines = ["", "[[person]]",
             f"id = {toml_string(keys.person_id)}",
             f"name = {toml_string(keys.name)}"]
    if role:
        lines.append(f"role = {toml_string(role)}")
    lines.append(f"public_key = {toml_string(keys.public_key_b64)}")
    lines.append('certificate = """')
    lines.extend(keys.certificate_pem.strip().splitlines())
    lines.append('"""')
    return "\n".join(lines) + "\n"


def add_person(project_root: Path, keys: PersonKeys, role: str = "") -> bool:
    """Append the person to project.toml; False if already listed with the same keys.

    Refuses when the id is listed with a different public key or certificate.
    """
    path = project_file(project_root)
    listed = people_from_data(read_toml(path)).get(keys.person_id)
    if listed is not None:
        same = (listed["public_key"] == keys.public_key_b64
                and listed["certificate"].strip() == keys.certificate_pem.strip())
        if same:
            return False
        raise ArchiveError(f"person '{keys.person_id}' is already listed with other keys",
                           file=path, key="person",
                           fix="choose another id, or remove the old [[person]] entry by hand "
                               "if that key is retired (issued revisions keep their own copy)")
    original = path.read_bytes()
    text = original.decode("utf-8")
    if text and not text.endswith("\n"):
        text += "\n"
    text += person_block(keys, role)
    people_from_data(tomllib.loads(text), path)   # valid TOML, no name or key listed twice
    path.write_text(text, encoding="utf-8")
    return True
