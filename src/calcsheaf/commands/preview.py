"""`calcsheaf preview PROJECT [--port N]`: serve the site on localhost and rebuild on change.

Only the loopback address is bound.  Inputs are polled once a second; a change
triggers an incremental build, whose atomic swap means a page is never served
half-written.
"""

from __future__ import annotations

import functools
import http.server
import sys
import threading
import time
from pathlib import Path

from .build import build, input_key


def preview(project_root: Path, port: int = 8000, out=None, polls: int | None = None) -> int:
    """Serve PROJECT/_site at http://127.0.0.1:PORT/ until interrupted (or `polls` polls)."""
    out = out or sys.stdout
    root = Path(project_root)
    target = root / "_site"
    build(root, out=out)
    handler = functools.partial(_QuietHandler, directory=str(target))
    server = http.server.ThreadingHTTPServer(("127.0.0.1", port), handler)
    threading.Thread(target=server.serve_forever, daemon=True).start()
    print(f"serving {target} at http://127.0.0.1:{server.server_port}/ (Ctrl-C to stop)", file=out)
    seen = input_key(root, target)
    count = 0
    try:
        while polls is None or count < polls:
            time.sleep(1.0)
            count += 1
            now = input_key(root, target)
            if now != seen:
                print("change seen: rebuilding", file=out)
                build(root, out=out)
                seen = now
    finally:
        server.shutdown()
        server.server_close()
    return 0


class _QuietHandler(http.server.SimpleHTTPRequestHandler):
    def log_message(self, format, *args):
        pass
