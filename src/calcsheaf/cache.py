"""Content-addressed build cache under PROJECT/.calcsheaf-cache/.

Keys are SHA-256 over the calc file's bytes, the tool's code fingerprint
(source and theme, so a new version never trusts old entries) and whatever
else the entry depends on.  Entries are pickles with a checksum; a corrupt
or unreadable entry is treated as missing and rebuilt.
"""

from __future__ import annotations

import hashlib
import os
import pickle
from pathlib import Path

from .fingerprint import code_fingerprint

FOLDER = ".calcsheaf-cache"


def key(*parts: bytes | str) -> str:
    digest = hashlib.sha256(code_fingerprint().encode())
    for part in parts:
        data = part.encode() if isinstance(part, str) else part
        digest.update(len(data).to_bytes(8, "big") + data)
    return digest.hexdigest()


class Cache:
    def __init__(self, project_root: Path) -> None:
        self.folder = Path(project_root) / FOLDER

    def _path(self, kind: str, entry: str) -> Path:
        return self.folder / kind / f"{entry}.pickle"

    def get(self, kind: str, entry: str):
        path = self._path(kind, entry)
        try:
            raw = path.read_bytes()
        except OSError:
            return None
        checksum, body = raw[:32], raw[32:]
        if hashlib.sha256(body).digest() != checksum:
            return None
        try:
            return pickle.loads(body)
        except Exception:  # a corrupt entry is a miss, never trusted
            return None

    def put(self, kind: str, entry: str, value) -> None:
        body = pickle.dumps(value, protocol=pickle.HIGHEST_PROTOCOL)
        path = self._path(kind, entry)
        try:
            path.parent.mkdir(parents=True, exist_ok=True)
            temp = path.with_suffix(f".tmp-{os.getpid()}")
            temp.write_bytes(hashlib.sha256(body).digest() + body)
            os.replace(temp, path)
        except OSError:
            pass


def tree_digest(root: Path, names: tuple[str, ...]) -> str:
    """SHA-256 over the names and bytes of the given files and folders under `root`, sorted."""
    digest = hashlib.sha256()
    for name in names:
        path = Path(root) / name
        items = [path] if path.is_file() else sorted(p for p in path.rglob("*") if p.is_file()) \
            if path.is_dir() else []
        for item in items:
            digest.update(item.relative_to(root).as_posix().encode() + b"\0")
            digest.update(hashlib.sha256(item.read_bytes()).digest())
    return digest.hexdigest()
