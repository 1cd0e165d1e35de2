"""Content-addressed, authenticated build cache under PROJECT/.calcsheaf-cache/.

Keys are SHA-256 over the calc file's bytes, the tool's code fingerprint
(source and theme, so a new version never trusts old entries) and whatever
else the entry depends on.

The project folder may come from someone else, so an entry is data that can
neither run code nor be forged:

- format: a JSON header (plain data only) followed by raw file bytes; nothing
  is unpickled or evaluated when an entry is read;
- authentication: HMAC-SHA256 over the entry's kind, key and body with a
  secret of this user kept outside every project (`cache_key_file()`, created
  with mode 0600 on first use).  An entry without a valid MAC (made by another
  user or machine, altered, truncated) is ignored and rebuilt, and reported
  once per command (`Cache.notes`).

When the secret cannot be read or made, the cache is off (every calc is
analysed afresh) and the reason is one of the notes.

Links are never followed: the cache is off (with a note) when its folder or a
subfolder is a symbolic link or resolves outside the project; entries are read
with O_NOFOLLOW, and written to a temporary file made with O_EXCL under an
unpredictable name (mkstemp in the entry's folder), then renamed into place.
"""

from __future__ import annotations

import hashlib
import hmac
import json
import os
import secrets
import stat
import tempfile
from pathlib import Path

from . import settings
from .fingerprint import code_fingerprint

FOLDER = ".calcsheaf-cache"
SUFFIX = ".entry"
KEY_BYTES = 32
KEY_FILE_ENV = "CALCSHEAF_CACHE_KEY_FILE"
_MAGIC = b"calcsheaf-cache-2\n"
_MAC_BYTES = hashlib.sha256().digest_size


def key(*parts: bytes | str) -> str:
    digest = hashlib.sha256(code_fingerprint().encode())
    for part in parts:
        data = part.encode() if isinstance(part, str) else part
        digest.update(len(data).to_bytes(8, "big") + data)
    return digest.hexdigest()


def cache_key_file() -> Path:
    """This user's cache secret: $CALCSHEAF_CACHE_KEY_FILE, else
    $XDG_CONFIG_HOME/calcsheaf/cache.key, else ~/.config/calcsheaf/cache.key."""
    override = settings.cache_key_file()
    if override is not None:
        return override
    base = os.environ.get("XDG_CONFIG_HOME") or str(Path.home() / ".config")
    return Path(base) / "calcsheaf" / "cache.key"


class KeyFileError(Exception):
    """The cache secret cannot be used; the message says why and what to do."""


def load_secret(path: Path) -> bytes:
    """The secret in `path`, made (random, mode 0600) when the file does not exist yet.

    A new key is written to a private temporary file and linked into place, so a
    concurrent build never reads a half-written key."""
    try:
        return _read_secret(path)
    except FileNotFoundError:
        pass
    temp = path.with_name(f".{path.name}.tmp-{os.getpid()}")
    fd = None
    try:
        path.parent.mkdir(mode=0o700, parents=True, exist_ok=True)
        fd = os.open(temp, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
        try:
            os.write(fd, secrets.token_bytes(KEY_BYTES))
            os.fsync(fd)
        finally:
            os.close(fd)
        try:
            os.link(temp, path)
        except FileExistsError:        # made by a concurrent build a moment ago
            pass
    except OSError as exc:
        raise KeyFileError(f"cannot create the cache key {path} ({exc.strerror})") from None
    finally:
        if fd is not None:
            temp.unlink(missing_ok=True)
    return _read_secret(path)


def _read_secret(path: Path) -> bytes:
    try:
        fd = os.open(path, os.O_RDONLY | os.O_NOFOLLOW)
    except FileNotFoundError:
        raise
    except OSError as exc:
        raise KeyFileError(f"cannot read the cache key {path} ({exc.strerror})") from None
    try:
        info = os.fstat(fd)
        if not stat.S_ISREG(info.st_mode):
            raise KeyFileError(f"the cache key {path} is not a regular file")
        if info.st_uid != os.getuid() or info.st_mode & 0o077:
            raise KeyFileError(f"the cache key {path} is readable or writable by other users "
                               f"(mode {stat.S_IMODE(info.st_mode):o}) or owned by another user")
        data = os.read(fd, KEY_BYTES + 1)
    finally:
        os.close(fd)
    if len(data) != KEY_BYTES:
        raise KeyFileError(f"the cache key {path} is {len(data)} bytes long, not {KEY_BYTES}")
    return data


class Cache:
    """Authenticated entries: `put(kind, entry, meta, files)`, `get(kind, entry)`.

    `meta` is JSON-safe data (dicts, lists, str, int, float, bool, None);
    `files` maps names to bytes.  `notes` collects what the user should hear
    once: authentication failures and a cache that is off.
    """

    def __init__(self, project_root: Path, secret: bytes | None = None) -> None:
        self.root = Path(project_root)
        self.folder = self.root / FOLDER
        self.notes: list[str] = []
        self.rejected: list[Path] = []
        self._secret = secret
        if secret is None:
            try:
                self._secret = load_secret(cache_key_file())
            except KeyFileError as exc:
                self.notes.append(f"the build cache is off: {exc}. Fix: let its folder be written "
                                  "and keep the file private to you (remove it to have a new one "
                                  f"made, mode 0600), or set {KEY_FILE_ENV} to a file of your own")

        if self.enabled:
            self._place_is_safe(self.folder)

    @property
    def enabled(self) -> bool:
        return self._secret is not None

    def _path(self, kind: str, entry: str) -> Path:
        return self.folder / kind / f"{entry}{SUFFIX}"

    def _place_is_safe(self, folder: Path) -> bool:
        """False, and the cache turned off with a note, when `folder` (the cache folder or one
        of its subfolders) is a link, not a folder, or resolves to anywhere but its own place
        in the project.  A folder that does not exist yet is safe."""
        if not folder.is_symlink() and not folder.exists():
            return True
        expected = self.root.resolve() / folder.relative_to(self.root)
        if folder.is_symlink():
            why = "is a symbolic link"
        elif not folder.is_dir():
            why = "is not a folder"
        elif folder.resolve() != expected:
            why = f"resolves to {folder.resolve()}, outside its place in the project"
        else:
            return True
        self._secret = None
        self.notes.append(f"the build cache is off: {folder} {why}, and the cache never writes "
                          "or reads through links. Fix: delete it (the cache is safe to delete; "
                          "a real folder is made on the next build)")
        return False

    def _entry_folder(self, kind: str, create: bool) -> Path | None:
        """The folder of `kind`'s entries (made when `create`), or None when it is not safe."""
        sub = self.folder / kind
        for folder in (self.folder, sub):
            if create and not folder.is_symlink():
                folder.mkdir(mode=0o700, exist_ok=True)
            if not self._place_is_safe(folder):
                return None
        return sub

    def _mac(self, kind: str, entry: str, body: bytes) -> bytes:
        label = f"{kind}\0{entry}\0".encode()
        return hmac.new(self._secret, _MAGIC + label + body, hashlib.sha256).digest()

    def get(self, kind: str, entry: str) -> tuple[dict, dict[str, bytes]] | None:
        """(meta, files) of an authentic entry; None when missing, unreadable or not authentic."""
        if not self.enabled or self._entry_folder(kind, create=False) is None:
            return None
        path = self._path(kind, entry)
        try:
            raw = _read_no_follow(path)
        except OSError:
            return None
        head, mac, body = raw[:len(_MAGIC)], raw[len(_MAGIC):len(_MAGIC) + _MAC_BYTES], \
            raw[len(_MAGIC) + _MAC_BYTES:]
        if head != _MAGIC or not hmac.compare_digest(mac, self._mac(kind, entry, body)):
            self.rejected.append(path)
            return None
        try:
            return _unpack(body)
        except (ValueError, KeyError, TypeError):   # authentic but unreadable: a miss
            return None

    def put(self, kind: str, entry: str, meta: dict, files: dict[str, bytes]) -> None:
        """Store an entry atomically; a cache that cannot be written is skipped silently."""
        if not self.enabled:
            return
        body = _pack(meta, files)
        path = self._path(kind, entry)
        try:
            if self._entry_folder(kind, create=True) is None:
                return
            _write_new(path, _MAGIC + self._mac(kind, entry, body) + body)
        except OSError:
            pass

    def report(self) -> list[str]:
        """The notes for the user, each once (authentication failures counted together)."""
        notes = list(dict.fromkeys(self.notes))
        if self.rejected:
            notes.append(f"ignored {len(self.rejected)} entr{'y' if len(self.rejected) == 1 else 'ies'} "
                         f"of {self.folder} that failed authentication (made by another user or "
                         "altered); they were rebuilt from the inputs")
        return notes


def _read_no_follow(path: Path) -> bytes:
    """The bytes of the regular file `path`; OSError when it is a link or not a regular file."""
    fd = os.open(path, os.O_RDONLY | os.O_NOFOLLOW)
    try:
        if not stat.S_ISREG(os.fstat(fd).st_mode):
            raise OSError(f"{path} is not a regular file")
        chunks = []
        while chunk := os.read(fd, 1 << 20):
            chunks.append(chunk)
        return b"".join(chunks)
    finally:
        os.close(fd)


def _write_new(path: Path, data: bytes) -> None:
    """Write `data` to a fresh temporary file beside `path` (O_EXCL, unpredictable name, so a
    planted link is never followed), then rename it over `path` (a link there is replaced,
    not followed)."""
    fd, temp = tempfile.mkstemp(prefix=f"{path.name}.tmp-", dir=path.parent)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
        os.replace(temp, path)
    except BaseException:
        Path(temp).unlink(missing_ok=True)
        raise


def _pack(meta: dict, files: dict[str, bytes]) -> bytes:
    names = sorted(files)
    header = json.dumps({"meta": meta, "files": [[n, len(files[n])] for n in names]},
                        sort_keys=True, separators=(",", ":")).encode("utf-8")
    return len(header).to_bytes(8, "big") + header + b"".join(files[n] for n in names)


def _unpack(body: bytes) -> tuple[dict, dict[str, bytes]]:
    size = int.from_bytes(body[:8], "big")
    header = json.loads(body[8:8 + size].decode("utf-8"))
    files, offset = {}, 8 + size
    for name, length in header["files"]:
        if not isinstance(name, str) or not isinstance(length, int) or offset + length > len(body):
            raise ValueError("malformed cache entry")
        files[name] = body[offset:offset + length]
        offset += length
    if offset != len(body) or not isinstance(header["meta"], dict):
        raise ValueError("malformed cache entry")
    return header["meta"], files


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
