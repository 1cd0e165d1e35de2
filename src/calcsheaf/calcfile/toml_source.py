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
_TOML_END = "(at end of document)"
MAX_FILE_BYTES = 1_000_000
MAX_NESTING = 8             # levels of tables and arrays (a calc file needs 4)

# tomllib's wording -> what to do about it; the first match wins.
_SYNTAX_FIXES = (
    ("Illegal character '\\n'", "close the quoted text on the same line with \" "
     '(use """...""" for text over several lines)'),
    ("Unterminated string", 'close the quoted text with its matching quote'),
    ("Expected \"'\"", "close the quoted text with its matching '"),
    ("Expected newline or end of document", 'put a value with a unit in quotes, e.g. k = "1.2 MN/m", '
     "and write one key = value per line"),
    ("Invalid value", 'write a value after "=": text in quotes, a number, true/false, [...] or { ... }'),
    ("Cannot overwrite a value", "a key may appear only once in a table: remove or rename the repeated key"),
    ("Cannot declare", "a [table] may appear only once (use [[name]] for repeated entries): "
     "merge the two tables"),
    ("Expected ']'", "close the table header with ], e.g. [energy]"),
    ("Unclosed inline table", "close the inline table with } on the same line"),
    ("Expected '=' after a key", "write key = value"),
    ("Unescaped '\\'", "write a backslash as \\\\ or use single quotes around the text"),
)
_GENERIC_FIX = "correct the TOML syntax at that place (quotes, brackets, '=')"


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


def read_toml(path: Path, raw: bytes | None = None) -> tuple[str, dict, dict[str, int]]:
    """Text, parsed data and key lines of a TOML file; InputError when unreadable.

    `raw`: the file's bytes, already read by the caller (then `path` only names them)."""
    if raw is None:
        raw = _read_regular_file(path)
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
        raise syntax_error(path, text, str(exc)) from None
    except RecursionError:
        raise _too_deep(path, _deep_line(text), None) from None
    lines = key_lines(text)
    deep = _deepest_key(data)
    if deep is not None:
        probe = deep
        while probe and probe not in lines:
            probe = probe.rpartition(".")[0]
        raise _too_deep(path, lines.get(probe), deep)
    return text, data, lines


def _too_deep(path: Path, line: int | None, key: str | None) -> InputError:
    return InputError(f"nests arrays or tables more than {MAX_NESTING} levels deep", file=path,
                      line=line, key=key, fix="flatten the value: a calc file needs at most a few "
                                              "levels ([table], [[rows]], { inline tables })")


def _deep_line(text: str) -> int | None:
    """First line where brackets and braces (counted outside quotes, roughly) open deeper
    than MAX_NESTING: where to look when the parser itself gave up."""
    depth = 0
    for number, line in enumerate(text.splitlines(), start=1):
        for char in re.sub(r'"[^"]*"|\'[^\']*\'', "", line.split("#", 1)[0]):
            depth += (char in "[{") - (char in "]}")
            if depth > MAX_NESTING:
                return number
    return None


def _deepest_key(data, path: str = "", depth: int = 0) -> str | None:
    """Key path of the first value nested more than MAX_NESTING levels deep, else None."""
    if depth > MAX_NESTING:
        return path or "(top)"
    items = data.items() if isinstance(data, dict) else \
        enumerate(data, start=1) if isinstance(data, list) else ()
    for name, value in items:
        inner = f"{path}[{name}]" if isinstance(data, list) else (f"{path}.{name}" if path else str(name))
        found = _deepest_key(value, inner, depth + 1)
        if found is not None:
            return found
    return None


def _read_regular_file(path: Path) -> bytes:
    try:
        if path.is_symlink() or not path.is_file():
            raise InputError("is not a regular file", file=path,
                             fix="replace the link or folder with the file itself")
        return path.read_bytes()
    except OSError as exc:
        raise InputError(f"cannot be read ({exc.strerror})", file=path,
                         fix="check that the file exists and is readable") from None


def syntax_error(path: Path, text: str, message: str) -> InputError:
    """InputError of a tomllib message, with its line and column and a fix for the usual slips."""
    position = _TOML_POSITION.search(message)
    line = int(position.group(1)) if position else None
    column = int(position.group(2)) if position else None
    if line is None and _TOML_END in message:
        line = max(1, len(text.splitlines()))
    problem = _TOML_POSITION.sub("", message).replace(_TOML_END, "at the end of the file").strip()
    repeated = _key_on_line(text, line) if "overwrite" in problem else None
    if repeated:
        problem += f" ('{repeated}' is given twice)"
    fix = next((f for pattern, f in _SYNTAX_FIXES if pattern in problem), _GENERIC_FIX)
    return InputError(f"is not valid TOML: {problem}", file=path, line=line, column=column, fix=fix)


def _key_on_line(text: str, line: int | None) -> str | None:
    lines = text.splitlines()
    match = _KEY_LINE.match(lines[line - 1]) if line and line <= len(lines) else None
    return _key_name(match) if match else None


def value_column(text: str, line: int | None, key: str) -> int | None:
    """1-based column of the first character inside the quoted value of `key` on `line`.

    `key` is the last part of a key path ("kinetic", "expr").  None when the value
    is not a one-line quoted string there (the caller then reports no column).
    """
    lines = text.splitlines()
    if line is None or not 1 <= line <= len(lines):
        return None
    pattern = re.compile(r"(?:^|[{,\s])(?:\"" + re.escape(key) + r"\"|'" + re.escape(key) + r"'|"
                         + re.escape(key) + r")\s*=\s*(\"(?!\"\")|')")
    match = pattern.search(lines[line - 1])
    return match.end() + 1 if match else None
