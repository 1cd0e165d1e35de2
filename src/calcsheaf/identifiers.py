"""The one validator of identifiers that name files and folders: calc numbers, person ids
and revision letters.

Each is matched with `fullmatch` (a `$` anchor would let a trailing newline through), so
an identifier can never carry a path separator, `..`, a leading dot or a control
character into `issued/<calc>/<rev>/`, `signoffs/<calc>.json` or a key file name.
Revisions also have an order: `revision_key` sorts them and `next_revision` gives the
letter a draft after the latest issue will most likely get.

Only the standard library and errors are imported: every layer may use this module.
"""

from __future__ import annotations

import re

from .errors import InputError

CALC_NUMBER = re.compile(r"[A-Za-z0-9][A-Za-z0-9._-]{0,63}")
PERSON_ID = re.compile(r"[A-Za-z0-9][A-Za-z0-9_.-]{0,39}")
REVISION = re.compile(r"[A-Za-z0-9][A-Za-z0-9._-]{0,15}")
RESERVED_REVISIONS = frozenset({"current"})

_RULES = {
    "calc number": (CALC_NUMBER, "use 1-64 letters, digits, '.', '_' or '-', starting with a "
                                 "letter or digit (e.g. C-102)"),
    "person id": (PERSON_ID, "use 1-40 letters, digits, '.', '_' or '-', starting with a "
                             "letter or digit (e.g. initials)"),
    "revision": (REVISION, "use 1-16 letters, digits, '.', '_' or '-', starting with a letter "
                           "or digit (e.g. A, B, P1)"),
}


def problem(kind: str, text) -> str | None:
    """None when `text` is a valid identifier of `kind`, else what is wrong with it."""
    pattern, _ = _RULES[kind]
    if not isinstance(text, str):
        return f"{kind} must be text, not {type(text).__name__}"
    if not pattern.fullmatch(text):
        return f"{kind} {text!r} is not allowed (it could not safely name a file)"
    if ".." in text:
        return f"{kind} {text!r} is not allowed (it contains '..')"
    if kind == "revision" and text.lower() in RESERVED_REVISIONS:
        return f"revision {text!r} is reserved (`current` means the working calc file)"
    return None


def fix(kind: str) -> str:
    """How to write a valid identifier of `kind`."""
    return _RULES[kind][1]


def check(kind: str, text, *, key: str = "", file=None, line: int | None = None) -> str:
    """`text` when it is a valid identifier of `kind`; InputError (with key and fix) otherwise."""
    found = problem(kind, text)
    if found:
        raise InputError(found, file=file, line=line, key=key or kind, fix=fix(kind))
    return text


def calc_number(text, **where) -> str:
    return check("calc number", text, **where)


def person_id(text, **where) -> str:
    return check("person id", text, **where)


def revision(text, **where) -> str:
    return check("revision", text, **where)


_SEGMENT = re.compile(r"[A-Za-z]+|[0-9]+|[^A-Za-z0-9]+")


def revision_key(rev: str) -> tuple:
    """Sort key of a revision: letters as in spreadsheet columns (A < Z < AA), digits as numbers.

    Each run of letters, digits or separators is one segment; letters compare
    case-insensitively, by length first.  So A < B < Z < AA, P1 < P2 < P10, and A < A.1.
    """
    key = []
    for seg in _SEGMENT.findall(rev):
        if seg.isdigit():
            key.append((1, len(seg.lstrip("0")), seg.lstrip("0")))
        elif seg.isalpha():
            key.append((2, len(seg), seg.upper()))
        else:
            key.append((0, len(seg), seg))
    return tuple(key)


def next_revision(latest: str | None) -> str:
    """The revision after `latest`: A when none, B after A, AA after Z, P2 after P1.

    A revision that ends in neither a letter nor a digit has no obvious successor: the
    text is then "after <latest>".
    """
    if latest is None:
        return "A"
    match = re.fullmatch(r"(.*?)([0-9]+)", latest)
    if match:
        width = len(match.group(2))
        return f"{match.group(1)}{int(match.group(2)) + 1:0{width}d}"
    match = re.fullmatch(r"(.*?)([A-Za-z]+)", latest)
    if match:
        return match.group(1) + _next_letters(match.group(2))
    return f"after {latest}"


def _next_letters(letters: str) -> str:
    """Spreadsheet-column successor keeping the case: A -> B, Z -> AA, az -> ba."""
    upper = letters.isupper() or not letters.islower()
    chars = list(letters.upper())
    i = len(chars) - 1
    while i >= 0 and chars[i] == "Z":
        chars[i] = "A"
        i -= 1
    if i < 0:
        chars.insert(0, "A")
    else:
        chars[i] = chr(ord(chars[i]) + 1)
    text = "".join(chars)
    return text if upper else text.lower()
