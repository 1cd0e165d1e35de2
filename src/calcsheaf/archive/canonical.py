"""Canonical bytes, hashes and dates shared by every archive record."""

from __future__ import annotations

import base64
import datetime as _dt
import hashlib
import json
import os
from pathlib import Path
from typing import Any

from .. import settings


def canonical_json(data: Any) -> bytes:
    """UTF-8 JSON with sorted keys and no spaces: the bytes that get signed."""
    return json.dumps(data, sort_keys=True, separators=(",", ":"),
                      ensure_ascii=False).encode("utf-8")


def pretty_json(data: Any) -> bytes:
    """Readable, byte-reproducible JSON for files people may open."""
    return (json.dumps(data, sort_keys=True, indent=2, ensure_ascii=False) + "\n").encode("utf-8")


def sha256_bytes(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


def sha256_file(path: Path) -> str:
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        for block in iter(lambda: handle.read(1 << 16), b""):
            digest.update(block)
    return digest.hexdigest()


def b64(data: bytes) -> str:
    return base64.b64encode(data).decode("ascii")


def unb64(text: str) -> bytes:
    return base64.b64decode(text.encode("ascii"), validate=True)


def today() -> str:
    """ISO date (UTC) from SOURCE_DATE_EPOCH when set, else today's date."""
    epoch = settings.source_date_epoch()
    if epoch is not None:
        moment = _dt.datetime.fromtimestamp(epoch, tz=_dt.timezone.utc)
    else:
        moment = _dt.datetime.now(tz=_dt.timezone.utc)
    return moment.date().isoformat()


def write_atomic(path: Path, data: bytes) -> None:
    """Write via a temporary sibling and rename, so readers never see half a file."""
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_name(path.name + ".tmp")
    tmp.write_bytes(data)
    os.replace(tmp, path)
