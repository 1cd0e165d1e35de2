"""Reading TOML text with line numbers for every key.

tomllib reports lines only for syntax errors; `key_lines` scans the text so that
later validation messages can name the line of any key.  Key paths use dots and
1-based indices for arrays of tables: "energy.kinetic", "output[2].unit".
"""

from __future__ import annotations

import re
import tomllib
from pathlib import Path

from ..errors import InputError

_KEY = r'(?:"(?P<dq>[^"]*)"|\'(?P<sq>[^\']*)\'|(?P<bare>[A-Za-z0-9_\-]+))'
_KEY_LINE = re.compile(r"^\s*" + _KEY + r"\s*=")
_INLINE_KEY = re.compile(r"[{,]\s*" + _KEY + r"\s*=")
_TOML_POSITION = re.compile(r"\(at line (\d+), column (\d+)\)")
MAX_FILE_BYTES = 1_000_000


def _key_name(match: re.Match) -> str:
    return next(g for g in (match.group("dq"), match.group("sq"), match.group("bare")) if g is not None)


def key_lines(text: str) -> dict[str, int]:
    """Map every key path in `text` to its 1-based line number."""
    lines: dict[str, int] = {}
    table = ""
    counters: dict[str, int] = {}
    for number, raw in enumerate(text.splitlines(), start=1):
        stripped = raw.strip()
        if stripped.startswith("[["):
            name = stripped[2:].split("]]", 1)[0].strip()
            counters[name] = counters.get(name, 0) + 1
            table = f"{name}[{counters[name]}]"
            lines.setdefault(name, number)
            lines[table] = number
        elif stripped.startswith("["):
            table = stripped[1:].split("]", 1)[0].strip()
            lines[table] = number
        else:
            match = _KEY_LINE.match(raw)
            if not match:
                continue
            full = f"{table}.{_key_name(match)}" if table else _key_name(match)
            lines.setdefault(full, number)
            rest = raw[match.end():]
            for inner in _INLINE_KEY.finditer(rest):
                lines.setdefault(f"{full}.{_key_name(inner)}", number)
    return lines


def read_toml(path: Path) -> tuple[str, dict, dict[str, int]]:
    """Text, parsed data and key lines of a TOML file; InputError when unreadable."""
    try:
        if path.is_symlink() or not path.is_file():
            raise InputError("is not a regular file", file=path,
                             fix="replace the link or folder with the file itself")
        raw = path.read_bytes()
    except OSError as exc:
        raise InputError(f"cannot be read ({exc.strerror})", file=path,
                         fix="check that the file exists and is readable") from None
    if len(raw) > MAX_FILE_BYTES:
        raise InputError(f"is {len(raw)} bytes long (limit {MAX_FILE_BYTES})", file=path,
                         fix="split the calc into smaller calcs")
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        line = raw[:exc.start].count(b"\n") + 1
        raise InputError(f"is not valid UTF-8 text (byte 0x{raw[exc.start]:02x} at offset "
                         f"{exc.start})", file=path, line=line,
                         fix="save the file with UTF-8 encoding") from None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        message = str(exc)
        position = _TOML_POSITION.search(message)
        line = int(position.group(1)) if position else None
        column = int(position.group(2)) if position else None
        problem = _TOML_POSITION.sub("", message).strip()
        raise InputError(f"is not valid TOML: {problem}", file=path, line=line, column=column,
                         fix="correct the TOML syntax at that place (quotes, brackets, '=')") from None
    return text, data, key_lines(text)
