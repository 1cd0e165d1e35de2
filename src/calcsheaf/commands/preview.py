"""`calcsheaf preview PROJECT [--port N]`: serve the site on localhost and rebuild on change.

Only the loopback address is bound, and only requests naming a loopback host
(localhost, 127.0.0.1, [::1]) in their Host header are answered, so a web page
elsewhere cannot read the site through a DNS name pointed at 127.0.0.1.  No
folder listings are served.  Inputs are polled once a second; a change
triggers an incremental build, whose atomic swap means a page is never served
half-written.  A build that fails (a syntax error while a file is being
edited) is reported and the last good site stays served; the next change
builds again.
"""

from __future__ import annotations

import errno
import functools
import http.server
import sys
import threading
import time
from pathlib import Path

from ..errors import CalcsheafError, InputError, UsageError
from ..outdir import check_output_folder
from .build import build, input_key

LOOPBACK_HOSTS = frozenset({"localhost", "127.0.0.1", "[::1]"})


def preview(project_root: Path, port: int = 8000, out=None, polls: int | None = None) -> int:
    """Serve PROJECT/_site at http://127.0.0.1:PORT/ until interrupted (or `polls` polls).

    `port` 0 takes any free port (tests)."""
    out = out or sys.stdout
    root = Path(project_root)
    if not (root / "project.toml").is_file():
        raise InputError("is not a calcsheaf project (no project.toml)", file=root,
                         fix="give the folder that holds project.toml, or make one with 'calcsheaf new PATH'")
    target = root / "_site"
    check_output_folder(target, root)
    server = _server(target, port)
    try:
        _try_build(root, out)
        threading.Thread(target=server.serve_forever, daemon=True).start()
        print(f"serving {target} at http://127.0.0.1:{server.server_port}/ (Ctrl-C to stop)", file=out)
        _watch(root, target, out, polls)
    finally:
        server.shutdown()
        server.server_close()
    return 0


def _server(target: Path, port: int) -> http.server.ThreadingHTTPServer:
    """The HTTP server on 127.0.0.1:`port`, or UsageError naming what to change."""
    if isinstance(port, bool) or not isinstance(port, int) or not 0 <= port <= 65535:
        raise UsageError(f"--port {port} is not a port number", key="--port",
                         fix="give a port from 1024 to 65535, e.g. --port 8001")
    handler = functools.partial(_SiteHandler, directory=str(target))
    try:
        return http.server.ThreadingHTTPServer(("127.0.0.1", port), handler)
    except OSError as exc:
        if exc.errno == errno.EADDRINUSE:
            problem = f"port {port} on 127.0.0.1 is already in use by another program"
        elif exc.errno in (errno.EACCES, errno.EPERM):
            problem = f"port {port} needs administrator rights"
        else:
            problem = f"cannot listen on 127.0.0.1 port {port} ({exc.strerror})"
        raise UsageError(problem, key="--port",
                         fix=f"give another port from 1024 to 65535, e.g. --port {_other(port)}, "
                             "or stop the program using it") from None


def _other(port: int) -> int:
    return port + 1 if 1024 <= port < 65535 else 8001


def _watch(root: Path, target: Path, out, polls: int | None) -> None:
    """Poll the inputs once a second and rebuild after each change."""
    seen = _key(root, target)
    count = 0
    while polls is None or count < polls:
        time.sleep(1.0)
        count += 1
        now = _key(root, target)
        if now is not None and now != seen:
            print("change seen: rebuilding", file=out)
            _try_build(root, out)
            seen = now


def _key(root: Path, target: Path) -> str | None:
    """The input key; the refusal itself when the project cannot be read as one (so that
    a change to or from that state builds, and the build reports it); None while a file
    cannot be read at all (an editor is replacing it)."""
    try:
        return input_key(root, target)
    except CalcsheafError as exc:
        return f"refused: {exc.message}"
    except OSError:
        return None


def _try_build(root: Path, out) -> None:
    """Build; a refused project or a file-system fault is printed and the old site kept."""
    try:
        build(root, out=out, err=out)
    except CalcsheafError as exc:
        print(f"build failed, still serving the last good site:\n{exc.message}\n"
              "(save the fixed file: preview rebuilds)", file=out)
    except OSError as exc:
        print(f"build failed, still serving the last good site: {exc.filename}: {exc.strerror}",
              file=out)


class _SiteHandler(http.server.SimpleHTTPRequestHandler):
    """Static files of the site: loopback Host names only, no folder listings, no log noise."""

    def send_head(self):
        if not _loopback(self.headers.get("Host")):
            self.send_error(403, "Host not allowed: preview answers only localhost and 127.0.0.1")
            return None
        return super().send_head()

    def list_directory(self, path):
        self.send_error(404, "No folder listings")
        return None

    def log_message(self, format, *args):
        pass


def _loopback(host: str | None) -> bool:
    """True when a Host header names a loopback host (with or without a port)."""
    if not host:
        return False
    name = host.strip().lower()
    if name.startswith("["):
        name = name[: name.find("]") + 1]
    else:
        name = name.rpartition(":")[0] if ":" in name else name
    return name in LOOPBACK_HOSTS
