"""The tool's code fingerprint: SHA-256 over its own source and default theme."""

from __future__ import annotations

import hashlib
from functools import lru_cache
from pathlib import Path

SUFFIXES = (".py", ".j2", ".css", ".svg", ".toml", ".html")


def _theme_dir() -> Path | None:
    source_tree = Path(__file__).resolve().parents[2] / "templates"
    if source_tree.is_dir():
        return source_tree
    packaged = Path(__file__).resolve().parent / "templates"
    return packaged if packaged.is_dir() else None


@lru_cache(maxsize=1)
def code_fingerprint() -> str:
    """Changes whenever any source file or theme file of calcsheaf changes."""
    digest = hashlib.sha256()
    folders = [Path(__file__).resolve().parent, _theme_dir()]
    for folder in (f for f in folders if f is not None):
        for path in sorted(folder.rglob("*")):
            if path.is_file() and path.suffix in SUFFIXES and "__pycache__" not in path.parts:
                digest.update(path.relative_to(folder).as_posix().encode() + b"\0" + path.read_bytes())
    return digest.hexdigest()[:16]
