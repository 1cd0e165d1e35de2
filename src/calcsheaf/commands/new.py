"""`calcsheaf new PATH`: scaffold a project folder that checks and builds as it is.

Writes project.toml, calcs/ with one worked calc and a short README.md, taken
from the calcsheaf.scaffold package.  The project is named after the folder.
An existing non-empty folder (or a file) at PATH is refused, never overwritten.
"""

from __future__ import annotations

import sys
from importlib import resources
from pathlib import Path

from ..errors import InputError

TEMPLATED = ("project.toml", "README.md")


def new(path: Path, out=None) -> int:
    """Create the project at `path`; 0 on success, InputError when `path` is taken."""
    out = out or sys.stdout
    root = Path(path)
    _refuse_taken(root)
    files = scaffold_files(root.resolve().name or "calcsheaf project", str(path))
    for rel in sorted(files):
        target = root / rel
        target.parent.mkdir(parents=True, exist_ok=True)
        target.write_text(files[rel], encoding="utf-8")
    print(f"created project {root}: " + ", ".join(sorted(files)), file=out)
    print(f"next: calcsheaf check {path}, then calcsheaf build {path} "
          f"and open {root / '_site' / 'index.html'}", file=out)
    return 0


def scaffold_files(name: str, folder: str) -> dict[str, str]:
    """Relative path -> text of every scaffold file, placeholders filled in."""
    base = resources.files("calcsheaf.scaffold")
    out: dict[str, str] = {}
    for rel, item in _walk(base, ""):
        text = item.read_text(encoding="utf-8")
        if rel in TEMPLATED:
            text = (text.replace("{{name}}", toml_string(name)).replace("{{title}}", name)
                    .replace("{{folder}}", folder))
        out[DOTFILES.get(rel, rel)] = text
    return out


# Scaffold files stored without their leading dot (package data skips dotfiles).
DOTFILES = {"gitignore.txt": ".gitignore"}


def toml_string(text: str) -> str:
    """`text` as a TOML basic string (quotes, backslashes and control characters escaped)."""
    escaped = []
    for ch in text:
        if ch in '"\\':
            escaped.append("\\" + ch)
        elif ord(ch) < 0x20 or ord(ch) == 0x7F:
            escaped.append(f"\\u{ord(ch):04X}")
        else:
            escaped.append(ch)
    return '"' + "".join(escaped) + '"'


def _walk(folder, prefix: str):
    """(relative path, resource) of the scaffold's data files, sorted; Python files skipped."""
    for item in sorted(folder.iterdir(), key=lambda i: i.name):
        rel = f"{prefix}{item.name}"
        if item.is_dir():
            if item.name != "__pycache__":
                yield from _walk(item, rel + "/")
        elif not item.name.endswith((".py", ".pyc")):
            yield rel, item


def _refuse_taken(root: Path) -> None:
    if root.is_dir() and any(root.iterdir()):
        raise InputError("the folder already exists and is not empty", file=root,
                         fix="give a new or empty folder, e.g. 'calcsheaf new my-project'; "
                             "nothing was written")
    if root.exists() and not root.is_dir():
        raise InputError("a file of this name already exists", file=root,
                         fix="choose another path for the new project; nothing was written")
