"""(d) A generated project built cold, with nothing changed, and after one edit.

The project holds `count` small calcs (spring chains of 1 to 3 masses and
pendulum chains of 1 to 3 links, in turn).  Each build is the command line
`calcsheaf build PROJECT [--jobs N]` in a subprocess, timed from outside
(interpreter start and imports included: what an engineer waits for).

"Cold" builds a freshly written project (no _site, no project cache);
"no-op" builds it again unchanged; "edit" changes one parameter of one calc
and builds again.  The tool's own per-version cache (XDG_CACHE_HOME: the
self-test report, made once per tool version) lives in one folder per
benchmark run, warmed first by `first_use` on a one-calc project and timed
apart: an engineer pays it once per installed version, not per project.
When `build --jobs` is not accepted yet, the builds run without it and the
--jobs comparison is reported as pending.

The builds run a frozen copy of the committed code (`git archive HEAD` on
PYTHONPATH): the cache is keyed by the tool's code, so edits made to the
working tree during a benchmark run would otherwise turn a no-op rebuild
into a full one.
"""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import chain
import springs

REPO = Path(__file__).resolve().parent.parent
PROJECT_TOML = '[project]\nnumber = "P-BENCH"\nname = "Benchmark project (generated, invented data)"\n'
EDITED_CALC = 0


def calc_text(index: int) -> str:
    """The index-th calc of the generated project (0-based)."""
    number = f"B-{index + 1:03d}"
    size = 1 + (index // 2) % 3
    if index % 2 == 0:
        return springs.calc_toml(size, number, scale=1.0 + 0.01 * index)
    return chain.calc_toml(size, number, form="pairs", analyses=True,
                           amplitude_rad=round(0.1 + 0.005 * index, 4))


def write_project(folder: Path, count: int) -> Path:
    folder.mkdir(parents=True)
    (folder / "project.toml").write_text(PROJECT_TOML, encoding="utf-8")
    calcs = folder / "calcs"
    calcs.mkdir()
    for index in range(count):
        (calcs / f"b-{index + 1:03d}.toml").write_text(calc_text(index), encoding="utf-8")
    return folder


def edit_one(folder: Path) -> None:
    """Change one parameter value (the first force or angle amplitude) of one calc."""
    path = folder / "calcs" / f"b-{EDITED_CALC + 1:03d}.toml"
    text = path.read_text(encoding="utf-8")
    edited = text.replace('F0 = { value = "40 N"', 'F0 = { value = "41 N"', 1)
    if edited == text:
        raise RuntimeError(f"the edit found nothing to change in {path}")
    path.write_text(edited, encoding="utf-8")


def freeze_code(folder: Path) -> Path:
    """Extract the committed tree (HEAD) into `folder`; returns its src/ folder."""
    folder.mkdir(parents=True)
    archive = subprocess.run(["git", "-C", str(REPO), "archive", "HEAD"], capture_output=True,
                             check=True).stdout
    subprocess.run(["tar", "-x", "-C", str(folder)], input=archive, check=True)
    return folder / "src"


def calcsheaf_command() -> list[str]:
    return [sys.executable, "-m", "calcsheaf"]


def code_in_use(env: dict) -> str:
    """The folder the build subprocesses import calcsheaf from."""
    done = subprocess.run([sys.executable, "-c", "import calcsheaf; print(calcsheaf.__file__)"],
                          capture_output=True, text=True, env=env, check=True)
    return str(Path(done.stdout.strip()).parent)


def jobs_supported(env: dict) -> bool:
    """True when `calcsheaf build --help` names a --jobs option."""
    done = subprocess.run([*calcsheaf_command(), "build", "--help"], capture_output=True,
                          text=True, env=env)
    return "--jobs" in done.stdout


def _build(project: Path, jobs: int | None, env: dict) -> float:
    command = [*calcsheaf_command(), "build", str(project)]
    if jobs is not None:
        command += ["--jobs", str(jobs)]
    started = time.perf_counter()
    done = subprocess.run(command, capture_output=True, text=True, env=env)
    seconds = time.perf_counter() - started
    print(f"  {' '.join(command[2:])}: {seconds:.1f} s (exit {done.returncode})", file=sys.stderr,
          flush=True)
    if done.returncode not in (0, 1) or not (project / "_site").is_dir():
        raise RuntimeError(f"{' '.join(command)} failed ({done.returncode}):\n{done.stderr[-2000:]}")
    if done.returncode == 1:
        raise RuntimeError(f"a generated calc failed:\n{done.stdout[-2000:]}{done.stderr[-2000:]}")
    return seconds


def environment(tool_cache: Path, code: Path) -> dict:
    """Build environment: the tool cache folder, the frozen code first on the path, a fixed date."""
    return dict(os.environ, XDG_CACHE_HOME=str(tool_cache), PYTHONPATH=str(code),
                SOURCE_DATE_EPOCH="1767225600")


def first_use(jobs: int | None, env: dict) -> float:
    """Seconds of a one-calc build with an empty tool cache (fills it)."""
    with tempfile.TemporaryDirectory() as folder:
        return _build(write_project(Path(folder) / "project", 1), jobs, env)


def measure(count: int, jobs: int | None, env: dict) -> dict:
    """Seconds of the cold, no-op and one-edit builds of a fresh `count`-calc project."""
    with tempfile.TemporaryDirectory() as folder:
        project = write_project(Path(folder) / "project", count)
        cold = _build(project, jobs, env)
        noop = _build(project, jobs, env)
        edit_one(project)
        edit = _build(project, jobs, env)
        shutil.rmtree(project)
    return {"cold_s": cold, "noop_s": noop, "edit_s": edit}
