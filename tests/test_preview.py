"""`calcsheaf preview`: loopback Host names only, no folder listings, port faults as messages,
and a build that fails while a file is being edited does not stop the server (issue 13,
items 10 and 12)."""

from __future__ import annotations

import contextlib
import http.client
import io
import re
import socket
import threading
import time
from pathlib import Path

import pytest

from calcsheaf import cli
from calcsheaf.commands import preview as preview_module
from calcsheaf.commands.preview import _loopback, preview
from calcsheaf.errors import UsageError
from calcsheaf.outdir import MARKER, MARKER_TEXT

PROJECT_TOML = '[project]\nnumber = "P-1"\nname = "Preview tests"\n'


def get(port: int, path: str, host: str | None) -> tuple[int, bytes]:
    connection = http.client.HTTPConnection("127.0.0.1", port, timeout=30)
    connection.putrequest("GET", path, skip_host=True)
    if host is not None:
        connection.putheader("Host", host)
    connection.endheaders()
    response = connection.getresponse()
    body = response.read()
    connection.close()
    return response.status, body


@pytest.fixture
def served(tmp_path, monkeypatch):
    """preview of a project whose build is replaced by writing a small site (no analysis)."""
    root = tmp_path / "p"
    (root / "calcs").mkdir(parents=True)
    (root / "project.toml").write_text(PROJECT_TOML)
    (root / "calcs" / "a.toml").write_text("# the build is faked: not analysed\n")
    site = root / "_site"
    (site / "C-1").mkdir(parents=True)
    (site / "static").mkdir()
    (site / "index.html").write_text("<p>index</p>")
    (site / "C-1" / "index.html").write_text("<p>calc</p>")
    (site / "static" / "theme.css").write_text("body {}")
    (site / MARKER).write_bytes(MARKER_TEXT)       # a folder calcsheaf wrote
    builds = []

    def fake_build(project_root, out=None, err=None):
        builds.append(project_root)
        if "broken" in (root / "project.toml").read_text():
            from calcsheaf.errors import InputError
            raise InputError("is not valid TOML: Expected '=' after a key", file=root / "project.toml",
                             line=3, fix="write key = value")
        return 0

    monkeypatch.setattr(preview_module, "build", fake_build)
    out = io.StringIO()
    worker = threading.Thread(target=preview, args=(root,), kwargs={"port": 0, "out": out, "polls": 8})
    worker.start()
    deadline = time.monotonic() + 60
    while "serving" not in out.getvalue() and time.monotonic() < deadline:
        time.sleep(0.05)
    port = int(re.search(r"127\.0\.0\.1:(\d+)/", out.getvalue()).group(1))
    yield root, port, out, builds
    worker.join(timeout=60)


@pytest.mark.parametrize("host", ["127.0.0.1", "localhost", "LOCALHOST", "[::1]"])
def test_loopback_host_names_are_served(served, host):
    _, port, _, _ = served
    assert get(port, "/C-1/index.html", f"{host}:{port}") == (200, b"<p>calc</p>")
    assert get(port, "/C-1/index.html", host)[0] == 200


@pytest.mark.parametrize("host", ["evil.example", "evil.example:8000", "127.0.0.1.evil.example",
                                  "localhost.evil.example", "", None])
def test_other_host_names_are_refused(served, host):
    """A DNS name pointed at 127.0.0.1 (rebinding) must not read the site."""
    _, port, _, _ = served
    status, body = get(port, "/C-1/index.html", host)
    assert status == 403 and b"calc" not in body


@pytest.mark.parametrize("path", ["/static/", "/C-1/../static/"])
def test_no_folder_listing_is_served(served, path):
    _, port, _, _ = served
    status, body = get(port, path, "127.0.0.1")
    assert status == 404 and b"theme.css" not in body


def test_a_folder_with_an_index_page_still_shows_it(served):
    _, port, _, _ = served
    assert get(port, "/", "localhost") == (200, b"<p>index</p>")


def test_a_failed_rebuild_keeps_serving_and_the_fix_rebuilds(served):
    root, port, out, builds = served
    (root / "project.toml").write_text(PROJECT_TOML + "broken line\n")
    deadline = time.monotonic() + 30
    while "build failed" not in out.getvalue() and time.monotonic() < deadline:
        time.sleep(0.1)
    assert "build failed, still serving the last good site" in out.getvalue()
    assert "project.toml:3: is not valid TOML" in out.getvalue()
    assert get(port, "/C-1/index.html", "localhost") == (200, b"<p>calc</p>")
    count = len(builds)
    (root / "project.toml").write_text(PROJECT_TOML)
    while len(builds) == count and time.monotonic() < deadline:
        time.sleep(0.1)
    assert len(builds) == count + 1, out.getvalue()


def test_loopback_parsing():
    assert _loopback("localhost:8000") and _loopback("[::1]:80") and _loopback("127.0.0.1")
    assert not _loopback("[::2]:80")
    assert not _loopback("evil@localhost") and not _loopback("localhost.evil:80")


def run(*argv: str) -> tuple[int, str]:
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        try:
            code = cli.main(list(argv))
        except SystemExit as exc:           # argparse refuses the command line
            code = exc.code
    return code, out.getvalue() + err.getvalue()


@pytest.mark.parametrize("port", ["0", "65536", "-1", "http"])
def test_a_port_out_of_range_is_a_usage_error(tmp_path, port):
    code, text = run("preview", str(tmp_path), "--port", port)
    assert code == 2 and "Traceback" not in text
    assert "--port must be a whole number from 1 to 65535" in text


def test_a_port_in_use_is_a_message(tmp_path):
    root = tmp_path / "p"
    (root / "calcs").mkdir(parents=True)
    (root / "project.toml").write_text(PROJECT_TOML)
    with socket.socket() as taken:
        taken.bind(("127.0.0.1", 0))
        taken.listen()
        port = taken.getsockname()[1]
        with pytest.raises(UsageError) as info:
            preview(root, port=port, polls=0)
        code, text = run("preview", str(root), "--port", str(port))
    assert f"port {port} on 127.0.0.1 is already in use" in info.value.problem
    assert "Fix: give another port" in info.value.message
    assert code == 2 and "Traceback" not in text and "already in use" in text
    assert not (root / "_site").exists(), "a build ran although the port could not be had"


def test_an_output_folder_preview_did_not_make_is_refused(tmp_path):
    root = tmp_path / "p"
    (root / "_site").mkdir(parents=True)
    (root / "project.toml").write_text(PROJECT_TOML)
    (root / "_site" / "mine.txt").write_text("mine")
    code, text = run("preview", str(root), "--port", "8123")
    assert code == 1 and "calcsheaf did not write" in text
    assert Path(root / "_site" / "mine.txt").read_text() == "mine"
