"""Builds: incremental cache, no-op rebuilds, reproducibility, atomic swap under kills,
serialised concurrent builds, per-calc isolation and fast start."""

from __future__ import annotations

import hashlib
import os
import random
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import pytest

from calcsheaf.cli import main

TINY = textwrap.dedent("""
    [calc]
    number = "{number}"
    title = "Mass on a spring ({number})"

    [parameters]
    m = "{mass} kg"
    k = "4 kN/m"
    g = "9.80665 m/s^2"

    [coordinates]
    x = {{ unit = "mm", label = "displacement, positive down" }}

    [energy]
    kinetic = "m/2*dot(x)**2"
    potential = "k/2*x**2 - m*g*x"

    [initial]
    x = "0 mm"
    "dot(x)" = "0 m/s"

    [[result]]
    name = "x_static"
    expr = "equilibrium(x)"
    unit = "mm"
    """)

RUNAWAY = textwrap.dedent("""
    [calc]
    number = "C-900"
    title = "A very stiff oscillator simulated for a very long time"

    [parameters]
    m = "1 kg"
    k = "1e14 N/m"

    [coordinates]
    x = { unit = "m" }

    [energy]
    kinetic = "m/2*dot(x)**2"
    potential = "k/2*x**2"

    [initial]
    x = "1 m"
    "dot(x)" = "0 m/s"

    [time_history]
    duration = "1000 s"
    points = 100
    """)


def make_project(root: Path, calcs: dict[str, str]) -> Path:
    (root / "calcs").mkdir(parents=True)
    (root / "project.toml").write_text('[project]\nnumber = "P-9"\nname = "Build tests"\n')
    for name, text in calcs.items():
        (root / "calcs" / name).write_text(text)
    return root


def tiny(number: str, mass: float = 10.0) -> str:
    return TINY.format(number=number, mass=mass)


def site_is_whole(site: Path) -> bool:
    """Every file listed in SHA256SUMS is there with that hash, and nothing else."""
    listed = {}
    for line in (site / "SHA256SUMS").read_text().splitlines():
        digest, _, rel = line.partition("  ")
        listed[rel] = digest
    actual = {p.relative_to(site).as_posix() for p in site.rglob("*") if p.is_file()}
    if actual != set(listed) | {"SHA256SUMS"}:
        return False
    return all(hashlib.sha256((site / rel).read_bytes()).hexdigest() == d for rel, d in listed.items())


def snapshot(site: Path) -> dict[str, bytes]:
    return {p.relative_to(site).as_posix(): p.read_bytes() for p in sorted(site.rglob("*")) if p.is_file()}


def cli(*args: str, env: dict | None = None, **kwargs) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "calcsheaf", *args], capture_output=True, text=True,
                          env={**os.environ, **(env or {})}, **kwargs)


@pytest.fixture(autouse=True)
def fixed_epoch(monkeypatch):
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1780000000")


def test_build_writes_site_checkable_with_sha256sum(tmp_path, capsys):
    project = make_project(tmp_path / "p", {"a.toml": tiny("C-1")})
    assert main(["build", str(project)]) == 0
    site = project / "_site"
    for rel in ("index.html", "C-1/index.html", "C-1/C-1.pdf", "C-1/results.json", "P-9.pdf",
                "selftest/index.html", "selftest/selftest.json"):
        assert (site / rel).is_file(), rel
    done = subprocess.run(["sha256sum", "-c", "--quiet", "SHA256SUMS"], cwd=site)
    assert done.returncode == 0


def test_noop_rebuild_does_nothing_and_edit_rebuilds_only_that_calc(tmp_path, capsys):
    project = make_project(tmp_path / "p", {"a.toml": tiny("C-1"), "b.toml": tiny("C-2", 20.0)})
    assert main(["build", str(project)]) == 0
    first = snapshot(project / "_site")
    capsys.readouterr()
    assert main(["build", str(project)]) == 0
    assert "up to date" in capsys.readouterr().out
    assert snapshot(project / "_site") == first
    (project / "calcs" / "b.toml").write_text(tiny("C-2", 25.0))
    assert main(["build", str(project)]) == 0
    out = capsys.readouterr().out
    assert "b.toml: solve" in out and "a.toml: solve" not in out
    after = snapshot(project / "_site")
    assert after["C-1/results.json"] == first["C-1/results.json"]
    assert after["C-2/results.json"] != first["C-2/results.json"]


def test_corrupt_cache_is_detected_and_rebuilt(tmp_path, capsys):
    project = make_project(tmp_path / "p", {"a.toml": tiny("C-1")})
    assert main(["build", str(project)]) == 0
    first = snapshot(project / "_site")
    entries = list((project / ".calcsheaf-cache").rglob("*.entry"))
    assert entries
    for entry in entries:
        entry.write_bytes(b"\0" * 40 + entry.read_bytes()[40:])
    (project / "._site.key").unlink()
    capsys.readouterr()
    assert main(["build", str(project)]) == 0
    assert "a.toml: solve" in capsys.readouterr().out
    assert snapshot(project / "_site") == first


def test_two_builds_of_same_inputs_are_byte_identical(tmp_path):
    project = make_project(tmp_path / "p", {"a.toml": tiny("C-1")})
    assert main(["build", str(project), "--out", str(tmp_path / "one")]) == 0
    assert main(["build", str(project), "--out", str(tmp_path / "two")]) == 0
    assert snapshot(tmp_path / "one") == snapshot(tmp_path / "two")


def test_killed_builds_leave_the_previous_site_whole(tmp_path):
    project = make_project(tmp_path / "p", {"a.toml": tiny("C-1"), "b.toml": tiny("C-2", 20.0)})
    assert cli("build", str(project)).returncode == 0
    site = project / "_site"
    rng = random.Random(7)
    for attempt in range(4):
        (project / "calcs" / "a.toml").write_text(tiny("C-1", 11.0 + attempt))
        proc = subprocess.Popen([sys.executable, "-m", "calcsheaf", "build", str(project)],
                                stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                                start_new_session=True)
        time.sleep(rng.uniform(0.3, 6.0))
        os.killpg(proc.pid, signal.SIGKILL)
        proc.wait()
        assert site_is_whole(site), f"site damaged after kill {attempt}"
    assert cli("build", str(project)).returncode == 0
    assert site_is_whole(site)
    assert not list(project.glob("._site.tmp-*")) and not list(project.glob("._site.old-*"))


def test_concurrent_builds_are_serialised(tmp_path):
    project = make_project(tmp_path / "p", {"a.toml": tiny("C-1")})
    procs = [subprocess.Popen([sys.executable, "-m", "calcsheaf", "build", str(project)],
                              stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True) for _ in range(2)]
    results = [p.communicate(timeout=600) for p in procs]
    assert [p.returncode for p in procs] == [0, 0], results
    assert site_is_whole(project / "_site")


def test_a_runaway_calc_fails_alone_at_its_time_limit(tmp_path):
    project = make_project(tmp_path / "p", {"a.toml": tiny("C-1"), "z.toml": RUNAWAY})
    done = cli("check", str(project), env={"CALCSHEAF_CALC_TIME_LIMIT": "5"}, timeout=300)
    assert done.returncode == 1
    assert "PASS  C-1" in done.stdout
    assert "exceeded its time limit of 5 s" in done.stderr
    assert "Traceback" not in done.stderr


def test_help_and_verify_import_no_heavy_library():
    code = ("import sys, contextlib, io\n"
            "from calcsheaf.cli import main\n"
            "with contextlib.redirect_stdout(io.StringIO()):\n"
            "    main(['--help']) if False else None\n"
            "    try:\n        main(['--help'])\n    except SystemExit:\n        pass\n"
            "import calcsheaf.commands.verify\n"
            "print(sorted(m for m in ('sympy', 'scipy', 'matplotlib', 'weasyprint') if m in sys.modules))\n")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    assert done.stdout.strip() == "[]", done.stderr


def test_jobs_must_be_positive(tmp_path, capsys):
    with pytest.raises(SystemExit) as exc:
        main(["build", str(tmp_path), "--jobs", "0"])
    assert exc.value.code == 2
    assert "--jobs must be a whole number of at least 1" in capsys.readouterr().err


def test_build_never_writes_into_issued(tmp_path):
    project = make_project(tmp_path / "p", {"a.toml": tiny("C-1")})
    frozen = project / "issued" / "C-1" / "A"
    frozen.mkdir(parents=True)
    (frozen / "notes.txt").write_text("kept as it is\n")
    before = snapshot(project / "issued")
    assert main(["build", str(project)]) == 0
    assert snapshot(project / "issued") == before


def test_a_damaged_issued_manifest_fails_its_calc_with_a_clear_message(tmp_path, capsys):
    project = make_project(tmp_path / "p", {"a.toml": tiny("C-1")})
    frozen = project / "issued" / "C-1" / "A"
    frozen.mkdir(parents=True)
    (frozen / "MANIFEST.json").write_text("{}\n")
    assert main(["build", str(project)]) == 1
    err = capsys.readouterr().err
    assert "MANIFEST.json: is not a calcsheaf manifest" in err and "Fix: restore" in err
    assert "Traceback" not in err


def test_preview_serves_the_site_on_loopback_and_rebuilds_on_change(tmp_path):
    import io
    import re
    import threading
    import urllib.request

    from calcsheaf.commands.preview import preview

    project = make_project(tmp_path / "p", {"a.toml": tiny("C-1")})
    out = io.StringIO()
    worker = threading.Thread(target=preview, args=(project,), kwargs={"port": 0, "out": out, "polls": 40})
    worker.start()
    deadline = time.monotonic() + 300
    while "serving" not in out.getvalue() and time.monotonic() < deadline:
        time.sleep(0.2)
    port = int(re.search(r"127\.0\.0\.1:(\d+)/", out.getvalue()).group(1))
    page = urllib.request.urlopen(f"http://127.0.0.1:{port}/C-1/index.html", timeout=30).read()
    assert b"Mass on a spring (C-1)" in page
    (project / "calcs" / "a.toml").write_text(tiny("C-1", 12.0).replace("Mass on a spring", "Edited mass"))
    while "rebuilding" not in out.getvalue() and time.monotonic() < deadline:
        time.sleep(0.2)
    worker.join(timeout=300)
    assert b"Edited mass" in (project / "_site" / "C-1" / "index.html").read_bytes()


def test_terminated_build_leaves_no_worker_behind(tmp_path):
    project = make_project(tmp_path / "p", {"a.toml": tiny("C-1"), "z.toml": RUNAWAY})
    proc = subprocess.Popen([sys.executable, "-m", "calcsheaf", "build", str(project), "--jobs", "2"],
                            stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
    time.sleep(4.0)
    proc.terminate()
    _, err = proc.communicate(timeout=180)
    assert proc.returncode != 0 and "Traceback" not in err
    time.sleep(0.5)
    survivors = subprocess.run(["pgrep", "-f", str(project)], capture_output=True, text=True).stdout
    assert survivors.strip() == "", f"workers left running: {survivors}"
